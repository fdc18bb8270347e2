/* The interactive map panel (Leaflet, vendored under static/vendor/). Progressive enhancement: the
   server-drawn SVG stays when this script or Leaflet is missing. No inline code: the data come from
   the JSON block #markmap-data (see registry/web/mark_map.py). */
(function () {
  "use strict";
  var dataEl = document.getElementById("markmap-data");
  var live = document.getElementById("markmap-live");
  if (!dataEl || !live || !window.L) { return; }
  var data = JSON.parse(dataEl.textContent);
  var fallback = live.parentNode.querySelector(".markmap-fallback");
  live.hidden = false;
  if (fallback) { fallback.hidden = true; }

  var map = L.map(live, { zoomSnap: 0.5, attributionControl: !!data.basemap, preferCanvas: false });
  if (data.basemap) {
    L.tileLayer(data.basemap, { maxZoom: 19, attribution: data.attribution || "" }).addTo(map);
  } else {
    live.classList.add("markmap-plain");
  }
  L.control.scale({ metric: true, imperial: false, maxWidth: 160 }).addTo(map);

  // Graticule: about four lines each way at a 1-2-5 step in minutes of arc, redrawn on every move.
  var grat = L.layerGroup().addTo(map);
  function niceMinutes(span) {
    var exp = Math.floor(Math.log10(span)), best = Math.pow(10, exp);
    [1, 2, 5].forEach(function (k) { if (k * Math.pow(10, exp) <= span) { best = k * Math.pow(10, exp); } });
    return best;
  }
  function dm(v, hemi) {
    var h = v >= 0 ? hemi[0] : hemi[1], m = Math.round(Math.abs(v) * 60 * 1000) / 1000;
    return Math.floor(m / 60) + "\u00b0" + (Math.round((m % 60) * 1000) / 1000) + "\u2032 " + h;
  }
  function drawGraticule() {
    grat.clearLayers();
    // as many lines as the labels leave room for: one per ~120 px across, ~70 px down (phones get fewer)
    var b = map.getBounds(), size = map.getSize();
    var nLon = Math.max(2, Math.floor(size.x / 120)), nLat = Math.max(2, Math.floor(size.y / 70));
    var step = Math.max(niceMinutes((b.getEast() - b.getWest()) * 60 / nLon),
      niceMinutes((b.getNorth() - b.getSouth()) * 60 / nLat)) / 60;
    var s = b.getSouth(), n = b.getNorth(), w = b.getWest(), e = b.getEast();
    var style = { color: "#8f897c", weight: 0.8, interactive: false };
    for (var lat = Math.floor(s / step) * step; lat <= n; lat += step) {
      grat.addLayer(L.polyline([[lat, w], [lat, e]], style));
      grat.addLayer(L.marker([lat, e], { interactive: false, keyboard: false,
        icon: L.divIcon({ className: "grat-label grat-lat", html: dm(lat, "NS"), iconSize: [72, 14], iconAnchor: [76, 15] }) }));
    }
    for (var lon = Math.floor(w / step) * step; lon <= e; lon += step) {
      grat.addLayer(L.polyline([[s, lon], [n, lon]], style));
      grat.addLayer(L.marker([s, lon], { interactive: false, keyboard: false,
        icon: L.divIcon({ className: "grat-label", html: dm(lon, "EW"), iconSize: null, iconAnchor: [-3, 16] }) }));
    }
  }

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
    var box = document.createElement("div");
    var a = document.createElement("a");
    a.href = p.url; a.textContent = p.code; a.className = "code";
    var word = document.createElement("span");
    word.className = p.usable ? "usable-word" : "nfu-word";
    word.textContent = p.label;
    box.appendChild(a); box.appendChild(document.createTextNode(" ")); box.appendChild(word);
    if (p.reason) {
      var why = document.createElement("div"); why.className = "small"; why.textContent = p.reason; box.appendChild(why);
    }
    marker.bindPopup(box);
    bounds.push([p.lat, p.lon]);
  });
  if (bounds.length === 1) { map.setView(bounds[0], 15); }
  else if (bounds.length) { map.fitBounds(bounds, { padding: [24, 24], maxZoom: 16 }); }
  else { map.setView([0, 0], 2); }
  if (data.centre && data.radius_m) {
    L.circle(data.centre, { radius: data.radius_m, color: "#24527a", weight: 1.2, dashArray: "5 4",
      fill: false, interactive: false }).addTo(map);
  }
  map.on("moveend", drawGraticule);
  drawGraticule();
})();
