/* Shared parts of the registry's interactive map panels (Leaflet, vendored under static/vendor/):
   the background (tiles when REGISTRY_BASEMAP_URL is set, else a plain background), a metric scale
   bar and a graticule labelled in degrees and minutes, redrawn on every move. Used by markmap.js
   (mark list, near a point) and jobmap.js (job page, job form). No inline code (strict CSP). */
(function () {
  "use strict";
  if (!window.L) { return; }

  function niceMinutes(span) {
    var exp = Math.floor(Math.log10(span)), best = Math.pow(10, exp);
    [1, 2, 5].forEach(function (k) { if (k * Math.pow(10, exp) <= span) { best = k * Math.pow(10, exp); } });
    return best;
  }
  function dm(v, hemi) {
    var h = v >= 0 ? hemi[0] : hemi[1], m = Math.round(Math.abs(v) * 60 * 1000) / 1000;
    return Math.floor(m / 60) + "\u00b0" + (Math.round((m % 60) * 1000) / 1000) + "\u2032 " + h;
  }

  // Graticule: as many lines as the labels leave room for (one per ~120 px across, ~70 px down) at a
  // 1-2-5 step in minutes of arc.
  function graticule(map, scale) {
    var grat = L.layerGroup().addTo(map);
    function draw() {
      grat.clearLayers();
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
      // no longitude label under the scale bar (bottom left)
      var reserve = scale && scale.getContainer() ? scale.getContainer().offsetWidth + 14 : 0;
      for (var lon = Math.floor(w / step) * step; lon <= e; lon += step) {
        grat.addLayer(L.polyline([[s, lon], [n, lon]], style));
        if (map.latLngToContainerPoint([s, lon]).x < reserve) { continue; }
        grat.addLayer(L.marker([s, lon], { interactive: false, keyboard: false,
          icon: L.divIcon({ className: "grat-label", html: dm(lon, "EW"), iconSize: null, iconAnchor: [-3, 16] }) }));
      }
    }
    map.on("moveend", draw);
    return draw;
  }

  // A map in `live` (the panel's element) with the background the data asks for and a scale bar;
  // returns the map and the graticule's draw function (call it once the view is set).
  function create(live, data, options) {
    var map = L.map(live, L.extend({ zoomSnap: 0.5, attributionControl: !!data.basemap }, options || {}));
    if (data.basemap) {
      L.tileLayer(data.basemap, { maxZoom: 19, attribution: data.attribution || "" }).addTo(map);
    } else {
      live.classList.add("map-plain");
    }
    var scale = L.control.scale({ metric: true, imperial: false, maxWidth: 160 }).addTo(map);
    return { map: map, drawGraticule: graticule(map, scale) };
  }

  // A popup body: a link with the code, then one line per item of `lines` (text only, never HTML).
  function popupBody(code, url, lines, firstClass) {
    var box = document.createElement("div");
    var a = document.createElement("a");
    a.href = url; a.textContent = code; a.className = "code";
    box.appendChild(a);
    lines.forEach(function (line, i) {
      var el = document.createElement(i === 0 ? "span" : "div");
      if (i === 0) { box.appendChild(document.createTextNode(" ")); el.className = firstClass || ""; }
      else { el.className = "small"; }
      el.textContent = line;
      box.appendChild(el);
    });
    return box;
  }

  window.RegistryMapKit = { create: create, popupBody: popupBody, dm: dm };
})();
