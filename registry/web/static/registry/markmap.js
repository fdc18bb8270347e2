/* The interactive map panel of the mark list and "marks near a point" (Leaflet, vendored under
   static/vendor/; background, scale bar and graticule from mapkit.js). Progressive enhancement: the
   server-drawn SVG stays when this script or Leaflet is missing. No inline code: the data come from
   the JSON block #markmap-data (see registry/web/mark_map.py). */
(function () {
  "use strict";
  var dataEl = document.getElementById("markmap-data");
  var live = document.getElementById("markmap-live");
  if (!dataEl || !live || !window.L || !window.RegistryMapKit) { return; }
  var data = JSON.parse(dataEl.textContent);
  var fallback = live.parentNode.querySelector(".markmap-fallback");
  live.hidden = false;
  if (fallback) { fallback.hidden = true; }

  var kit = window.RegistryMapKit.create(live, data, { preferCanvas: false });
  var map = kit.map;
  if (!data.basemap) { live.classList.add("markmap-plain"); }

  var bounds = [];
  if (data.centre) {
    bounds.push(data.centre);
    if (data.radius_m) {
      // the ring's box from the point itself (a circle's own bounds need a map view first)
      var box = L.latLng(data.centre[0], data.centre[1]).toBounds(2 * data.radius_m);
      bounds.push(box.getNorthEast(), box.getSouthWest());
    }
    L.marker(data.centre, { keyboard: false, title: "search point",
      icon: L.divIcon({ className: "mm-centre", html: "+", iconSize: [18, 18], iconAnchor: [9, 9] }) }).addTo(map);
  }
  data.points.forEach(function (p) {
    var cls = p.usable ? "mm-usable" : "mm-nfu";
    var marker = L.marker([p.lat, p.lon], {
      title: p.code + ": " + p.label,
      alt: p.code + ": " + p.label,
      icon: L.divIcon({ className: "mm-mark " + cls, html: p.usable ? "" : "\u00d7", iconSize: [16, 16], iconAnchor: [8, 8] })
    }).addTo(map);
    var lines = [p.label];
    if (p.reason) { lines.push(p.reason); }
    marker.bindPopup(window.RegistryMapKit.popupBody(p.code, p.url, lines, p.usable ? "usable-word" : "nfu-word"));
    bounds.push([p.lat, p.lon]);
  });
  if (bounds.length === 1) { map.setView(bounds[0], 15); }
  else if (bounds.length) { map.fitBounds(bounds, { padding: [24, 24], maxZoom: 16 }); }
  else { map.setView([0, 0], 2); }
  if (data.centre && data.radius_m) {
    L.circle(data.centre, { radius: data.radius_m, color: "#24527a", weight: 1.2, dashArray: "5 4",
      fill: false, interactive: false }).addTo(map);
  }
  kit.drawGraticule();
})();
