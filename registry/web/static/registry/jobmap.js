/* The job page's interactive map (Leaflet, vendored; background, scale bar and graticule from
   mapkit.js): the site, its coverage by the best horizontal 95 % figure (cells clipped to the site
   outline, over-tolerance cells hatched, as in the SVG), each chosen base's service area, and the marks
   by role; tapping or clicking a symbol (or Enter on it) opens its code and figures in words.
   Progressive enhancement: the server-drawn SVG stays when this script or Leaflet is missing. The
   data come from the JSON block #jobmap-data (registry/web/job_map.py, live_map_data): the same
   geometry as the SVG. No inline code (strict CSP). */
(function () {
  "use strict";
  var dataEl = document.getElementById("jobmap-data");
  var live = document.getElementById("jobmap-live");
  if (!dataEl || !live || !window.L || !window.RegistryMapKit) { return; }
  var kitApi = window.RegistryMapKit;
  var data = JSON.parse(dataEl.textContent);
  var figure = live.closest("figure") || document;
  live.hidden = false;
  Array.prototype.forEach.call(figure.querySelectorAll("[data-map-fallback]"), function (el) { el.hidden = true; });
  Array.prototype.forEach.call(figure.querySelectorAll("[data-map-live]"), function (el) { el.hidden = false; });

  var kit = kitApi.create(live, data, { maxZoom: 19 });
  var map = kit.map;
  var frame = L.latLngBounds(data.frame);
  map.fitBounds(frame, { padding: [4, 4] });

  var SVGNS = "http://www.w3.org/2000/svg";
  // The site and its cells share one SVG renderer, so that the cells can be clipped to the outline.
  var renderer = L.svg({ padding: 0.5 });
  var cover = [];
  (data.coverage || []).forEach(function (c) {
    var layer = L.polygon(c.polygons, { renderer: renderer, stroke: false, fillColor: c.colour, fillOpacity: 0.9,
      interactive: false }).addTo(map);
    cover.push({ layer: layer, hatched: c["class"] === data.hatch_class });
  });
  // Service areas are unions of whole cells too: clipped to the outline like the coverage.
  var areaLayers = (data.areas || []).map(function (a) {
    var area = L.polygon(a.polygons, { renderer: renderer, fill: false, color: "#2f3b52", weight: 2.4,
      dashArray: a.dash }).addTo(map);
    area.bindPopup(document.createTextNode(a.words));
    return area;
  });
  var site = data.site && data.site.length ? L.polygon(data.site, { renderer: renderer, fill: false,
    color: "#1d1f21", weight: 1.8, interactive: false }).addTo(map) : null;
  if (site && cover.length) {
    var svg = site.getElement().ownerSVGElement;
    var defs = document.createElementNS(SVGNS, "defs");
    defs.innerHTML = '<clipPath id="jm-site-clip"><path clip-rule="evenodd"></path></clipPath>' +
      '<pattern id="jm-hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">' +
      '<rect width="6" height="6" fill="#d9a98c"></rect><line x1="0" y1="0" x2="0" y2="6" stroke="#7a4a33" ' +
      'stroke-width="1.4"></line></pattern>';
    svg.insertBefore(defs, svg.firstChild);
    var clipPath = defs.querySelector("#jm-site-clip path");
    cover.forEach(function (c) {
      var el = c.layer.getElement();
      el.setAttribute("clip-path", "url(#jm-site-clip)");
      if (c.hatched) { el.setAttribute("fill", "url(#jm-hatch)"); el.setAttribute("fill-opacity", "1"); }
      el.classList.add("jm-cover");
    });
    areaLayers.forEach(function (a) { a.getElement().setAttribute("clip-path", "url(#jm-site-clip)"); });
    var syncClip = function () { clipPath.setAttribute("d", site.getElement().getAttribute("d") || ""); };
    renderer.on("update", syncClip);  // after the renderer has redrawn its paths (registered later)
    syncClip();
  }
  if (data.point) {
    var pt = L.circleMarker([data.point.lat, data.point.lon], { radius: 10, color: "#1d1f21", weight: 1.8,
      fillColor: data.point.colour, fillOpacity: 1 }).addTo(map);
    pt.bindPopup(document.createTextNode(data.point.words));
    L.marker([data.point.lat, data.point.lon], { interactive: false, keyboard: false,
      icon: L.divIcon({ className: "jm-site-cross", html: '<svg viewBox="0 0 30 30" width="30" height="30" ' +
        'aria-hidden="true"><path d="M0 15h30M15 0v30" stroke="#1d1f21"/></svg>', iconSize: [30, 30], iconAnchor: [15, 15] }) }).addTo(map);
  }

  var SHAPES = {
    base: '<path d="M12 2L21 19H3Z" fill="#1d1f21" stroke="#fff" stroke-width="1.2"/>',
    check: '<rect x="6" y="6" width="12" height="12" fill="#fff" stroke="#1d1f21" stroke-width="2.2"/>',
    candidate: '<circle cx="12" cy="12" r="5" fill="#fff" stroke="#24527a" stroke-width="2"/>',
    excluded: '<path d="M8 8l8 8M8 16l8-8" stroke="#77736c" stroke-width="1.6"/>'
  };
  data.marks.forEach(function (m) {
    var name = m.code + ": " + m.words[0];
    var marker = L.marker([m.lat, m.lon], {
      title: name,
      alt: name,
      riseOnHover: true,
      zIndexOffset: m.role === "base" ? 1000 : (m.role === "check" ? 500 : 0),
      icon: L.divIcon({ className: "jm-mark jm-" + m.role, iconSize: [24, 24], iconAnchor: [12, 12],
        html: '<svg viewBox="0 0 24 24" width="24" height="24" aria-hidden="true">' + SHAPES[m.role] + "</svg>" })
    }).addTo(map);
    marker.bindPopup(kitApi.popupBody(m.code, m.url, m.words, "jm-role"), { maxWidth: 260 });
  });
  kit.drawGraticule();
})();
