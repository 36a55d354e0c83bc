// probewise site maps: Leaflet (vendored, static/vendor/leaflet-1.9.4) in a plain metric
// coordinate system (L.CRS.Simple), no tiles, so everything works offline.
//
// Map coordinates: lat = northing - origin[1], lng = easting - origin[0] (metres; the origin
// is a round point at the lower left of the site, so the numbers stay small).
//
// Use (the data from server/web/routes_site.build_map_data), one of:
//   <div class="pw-map" data-map-key="m" data-map='{{ data|tojson }}'></div>
//   <div class="pw-map" data-map-key="m" data-map-url="/projects/1/site.json"></div>
//   <div class="pw-map" data-map-key="m" data-map-json="m-data"></div> with
//     <script type="application/json" id="m-data">...</script> (full page loads only: htmx
//     drops script elements from swapped content while allowScriptTags is off)
// Such elements are drawn on page load and after
// every htmx swap. Give the map element no id: while settling a swap htmx copies the class
// and style attributes of an old element onto the new one with the same id, which would
// strip Leaflet's classes from the new map. From other scripts:
//   var handle = ProbewiseMap.create(element, data, {layouts: true});
//   handle.map                       the L.Map
//   handle.toLatLng(x, y)            project metres -> L.LatLng
//   handle.toProject(latlng)         L.LatLng -> {x, y} in project metres
//   handle.addProbes(probes, {planned: true, className: "...", label: fn}) -> L.LayerGroup
//   handle.addPolygon(geometry, className, tooltipText) -> L.Polygon
//   handle.onClick(function (point, event) { point.x, point.y })
//   handle.fit(); handle.remove();
//   ProbewiseMap.get(element) -> the handle of a drawn element; ProbewiseMap.probeIcon(kind, opts)
// Colours and symbols come from static/css/probewise.css (.map-site, .map-zone, .map-area,
// .map-exclusion, .probe-<kind>) and match templates/_map_symbols.html and the overview plan.
(function () {
  "use strict";

  // The probe symbols come from the server (server/web/symbols.py, in the map data as
  // "symbols"), so the maps, the SVG plan and the printed plan draw the same shapes.
  var SYMBOLS = null;
  var WHITE = "#ffffff";
  var KIND_LABELS = { borehole: "Borehole", cpt: "CPT", dmt: "DMT", trial_pit: "Trial pit", other: "Other" };
  var savedViews = {};
  var handles = [];

  function escapeHtml(text) {
    return String(text).replace(/[&<>"']/g, function (c) {
      return { "&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;" }[c];
    });
  }

  function formatNumber(value, decimals) {
    if (value === null || value === undefined || !isFinite(value)) return "\u2014";
    var text = Number(value).toFixed(decimals);
    if (text.indexOf(".") >= 0) text = text.replace(/0+$/, "").replace(/\.$/, "");
    return text === "-0" ? "0" : text;
  }

  function niceLengthAtMost(length) {
    if (!(length > 0) || !isFinite(length)) return 1;
    var magnitude = Math.pow(10, Math.floor(Math.log10(length)));
    var factors = [5, 2, 1];
    for (var i = 0; i < factors.length; i++) {
      if (factors[i] * magnitude <= length) return factors[i] * magnitude;
    }
    return magnitude;
  }

  // A shape per method kind with the method's code in it: solid when planned, hollow when
  // existing (options.planned); options.code is the method's short code.
  function probeIcon(kind, options) {
    options = options || {};
    var symbols = SYMBOLS || {};
    var known = Object.prototype.hasOwnProperty.call(symbols, kind);
    var sym = symbols[known ? kind : "other"] || { path: "M-8 -8 L8 -8 L8 8 L-8 8 Z", colour: "#6a4a7a", text_y: 0 };
    var code = String(options.code || "").slice(0, 4);
    var fill = options.planned ? sym.colour : WHITE;
    var edge = options.planned ? "#111a20" : sym.colour;
    var ink = options.planned ? WHITE : sym.colour;
    var size = code.length <= 2 ? 7.5 : code.length === 3 ? 6.5 : 5.6;
    var classes = "probe probe-" + (known ? kind : "other") + (options.planned ? " is-planned" : "");
    if (options.className) classes += " " + options.className;
    var html =
      '<svg class="pw-probe-svg" viewBox="-12 -9.5 24 19" width="24" height="19" aria-hidden="true" focusable="false">' +
      '<g class="' + escapeHtml(classes) + '"><path class="probe-shape" d="' + escapeHtml(sym.path) + '" fill="' + fill +
      '" stroke="' + edge + '" stroke-width="' + (options.planned ? 1 : 1.6) + '"/>' +
      '<text class="probe-code" x="0" y="' + sym.text_y + '" text-anchor="middle" dominant-baseline="central" fill="' + ink +
      '" font-size="' + size + '">' + escapeHtml(code) + "</text></g></svg>";
    return L.divIcon({ html: html, className: "pw-probe-icon", iconSize: [24, 19], iconAnchor: [12, 9.5] });
  }

  // Polygon rings in Leaflet's nesting: Polygon -> [outer, holes...]; MultiPolygon -> [[...], ...]
  function geometryLatLngs(geometry, toLatLng) {
    if (!geometry || !geometry.coordinates) return null;
    function ring(positions) {
      return positions.map(function (p) { return toLatLng(p[0], p[1]); });
    }
    if (geometry.type === "Polygon") return geometry.coordinates.map(ring);
    if (geometry.type === "MultiPolygon") {
      return geometry.coordinates.map(function (rings) { return rings.map(ring); });
    }
    return null;
  }

  function ensureHatch(container) {
    if (document.getElementById("hatch-exclusion")) return;
    var svg = container.querySelector(".leaflet-overlay-pane svg");
    if (!svg) return;
    var ns = "http://www.w3.org/2000/svg";
    var defs = document.createElementNS(ns, "defs");
    var pattern = document.createElementNS(ns, "pattern");
    pattern.setAttribute("id", "hatch-exclusion");
    pattern.setAttribute("width", "7");
    pattern.setAttribute("height", "7");
    pattern.setAttribute("patternUnits", "userSpaceOnUse");
    pattern.setAttribute("patternTransform", "rotate(45)");
    var line = document.createElementNS(ns, "line");
    line.setAttribute("class", "hatch-line");
    line.setAttribute("x1", "0");
    line.setAttribute("y1", "0");
    line.setAttribute("x2", "0");
    line.setAttribute("y2", "7");
    pattern.appendChild(line);
    defs.appendChild(pattern);
    svg.insertBefore(defs, svg.firstChild);
  }

  // A scale bar for CRS.Simple (Leaflet's own assumes a geographic CRS): 1 map unit = 1 m.
  var ScaleControl = L.Control.extend({
    options: { position: "bottomright", maxWidth: 120 },
    onAdd: function (map) {
      this._div = L.DomUtil.create("div", "pw-map-scale");
      this._bar = L.DomUtil.create("div", "pw-map-scale-bar", this._div);
      this._label = L.DomUtil.create("span", "pw-map-scale-label", this._div);
      map.on("zoomend moveend resize", this._update, this);
      this._update();
      return this._div;
    },
    onRemove: function (map) {
      map.off("zoomend moveend resize", this._update, this);
    },
    _update: function () {
      var map = this._map;
      var metresPerPixel = 1 / map.options.crs.scale(map.getZoom());
      var length = niceLengthAtMost(metresPerPixel * this.options.maxWidth);
      this._bar.style.width = Math.round(length / metresPerPixel) + "px";
      this._label.textContent = length >= 1000 ? formatNumber(length / 1000, 3) + " km" : formatNumber(length, 3) + " m";
    }
  });

  // The pointer's position in project coordinates.
  var ReadoutControl = L.Control.extend({
    options: { position: "bottomleft" },
    initialize: function (handle, options) {
      L.setOptions(this, options);
      this._handle = handle;
    },
    onAdd: function (map) {
      this._div = L.DomUtil.create("div", "pw-map-readout");
      this._div.setAttribute("aria-hidden", "true");
      this._idle();
      map.on("mousemove", this._show, this);
      map.on("mouseout", this._idle, this);
      return this._div;
    },
    onRemove: function (map) {
      map.off("mousemove", this._show, this);
      map.off("mouseout", this._idle, this);
    },
    _idle: function () {
      this._div.textContent = this._handle.projected ? "E \u2014  N \u2014" : "x \u2014  y \u2014";
    },
    _show: function (event) {
      var p = this._handle.toProject(event.latlng);
      var labels = this._handle.projected ? ["E ", "  N "] : ["x ", "  y "];
      this._div.textContent = labels[0] + formatNumber(p.x, 1) + labels[1] + formatNumber(p.y, 1) + " m";
    }
  });

  function create(element, data, options) {
    if (data && data.symbols) SYMBOLS = data.symbols;
    options = options || {};
    var existing = get(element);
    if (existing) existing.remove();
    var origin = data.origin || [0, 0];
    var handle = {
      element: element,
      data: data,
      origin: origin,
      projected: !!data.crs,
      layers: {},
      clickHandlers: []
    };
    handle.toLatLng = function (x, y) {
      if (Array.isArray(x)) { y = x[1]; x = x[0]; }
      return L.latLng(Number(y) - origin[1], Number(x) - origin[0]);
    };
    handle.toProject = function (latlng) {
      return { x: latlng.lng + origin[0], y: latlng.lat + origin[1] };
    };

    var map = L.map(element, {
      crs: L.CRS.Simple,
      minZoom: -8,
      maxZoom: 6,
      zoomSnap: 0.25,
      zoomDelta: 0.5,
      wheelPxPerZoomLevel: 90,
      attributionControl: false,
      keyboard: true
    });
    handle.map = map;

    handle.addPolygon = function (geometry, className, tooltipText, layerOptions) {
      var latlngs = geometryLatLngs(geometry, handle.toLatLng);
      if (!latlngs) return null;
      var layer = L.polygon(latlngs, L.extend({
        className: className,
        fillRule: "evenodd",
        fillOpacity: 1,
        opacity: 1,
        weight: 1.5,
        interactive: !!tooltipText
      }, layerOptions || {}));
      if (tooltipText) layer.bindTooltip(escapeHtml(tooltipText), { sticky: true, className: "pw-map-tip" });
      return layer;
    };

    function tagLabel(layer, item, kind) {
      if (!layer || !item.tag) return null;
      var at = item.label ? handle.toLatLng(item.label[0], item.label[1]) : layer.getBounds().getCenter();
      return L.tooltip({
        permanent: true,
        direction: "center",
        className: "pw-map-tag pw-map-tag-" + kind,
        interactive: false
      }).setLatLng(at).setContent(escapeHtml(item.tag));
    }

    // Tags that would sit on one another at the first view move down a line (as the overview).
    function spreadTags() {
      var placed = [];
      labels.eachLayer(function (tip) {
        var p = map.latLngToContainerPoint(tip.getLatLng());
        var dy = 0;
        for (var tries = 0; tries < 20; tries++) {
          var clash = placed.some(function (q) { return Math.abs(p.x - q.x) < 26 && Math.abs(p.y + dy - q.y) < 13; });
          if (!clash) break;
          dy += 13;
        }
        if (dy) {
          tip.options.offset = L.point(0, dy);
          tip.update();
        }
        placed.push(L.point(p.x, p.y + dy));
      });
    }

    var labels = L.layerGroup();
    function featureGroup(items, className, kind, describe) {
      var group = L.featureGroup();
      (items || []).forEach(function (item) {
        var layer = handle.addPolygon(item.geometry, className, describe(item));
        if (!layer) return;
        group.addLayer(layer);
        var label = tagLabel(layer, item, kind);
        if (label) labels.addLayer(label);
      });
      return group;
    }

    var site = data.site ? handle.addPolygon(data.site, "map-site", null, { weight: 2 }) : null;
    handle.layers.site = site ? L.featureGroup([site]) : L.featureGroup();
    handle.layers.zones = featureGroup(data.zones, "map-zone", "zone", function (z) {
      return z.tag + " zone: " + z.name;
    });
    handle.layers.areas = featureGroup(data.areas, "map-area", "area", function (a) {
      return a.tag + " area of interest: " + a.name + " (weight " + formatNumber(a.weight, 2) + ")";
    });
    handle.layers.exclusions = featureGroup(data.exclusions, "map-exclusion", "exclusion", function (e) {
      return e.tag + " exclusion: " + e.name;
    });
    // Design elements (their page): footprints and the evaluation cells each covers.
    handle.layers.cells = featureGroup(data.element_cells, "map-element-cells", "cells", function (c) {
      return c.name;
    });
    handle.layers.elements = featureGroup(data.elements, "map-element", "element", function (e) {
      return e.tag + " design element: " + e.name + (e.cells != null ? " (" + e.cells + " cells)" : "");
    });
    handle.layers.labels = labels;

    handle.addProbes = function (probes, probeOptions) {
      probeOptions = probeOptions || {};
      var group = L.featureGroup();
      (probes || []).forEach(function (p) {
        var kindLabel = KIND_LABELS[p.kind] || p.kind || "probe";
        var text = probeOptions.label
          ? probeOptions.label(p)
          : p.id + " (" + p.method + ", " + kindLabel + ") at " + formatNumber(p.x, 2) + ", " + formatNumber(p.y, 2) +
            (p.final_depth_m ? "; final depth " + formatNumber(p.final_depth_m, 2) + " m" : "") +
            (p.depth_m ? "; depth " + formatNumber(p.depth_m, 2) + " m" : "");
        var marker = L.marker(handle.toLatLng(p.x, p.y), {
          icon: probeIcon(p.kind, Object.assign({ code: p.method }, probeOptions)),
          title: text,
          alt: text,
          keyboard: true,
          riseOnHover: true
        });
        marker.bindTooltip(escapeHtml(text), { direction: "top", offset: [0, -10], className: "pw-map-tip" });
        group.addLayer(marker);
      });
      return group;
    };
    handle.layers.existing = handle.addProbes(data.existing || []);

    // Probe ids beside their symbols (as on the overview plan), shown when there are few.
    handle.probeLabels = function (probes) {
      var group = L.layerGroup();
      (probes || []).forEach(function (p) {
        group.addLayer(L.tooltip({
          permanent: true,
          direction: "right",
          offset: [12, 0],
          className: "pw-map-probe-label",
          interactive: false
        }).setLatLng(handle.toLatLng(p.x, p.y)).setContent(escapeHtml(p.id)));
      });
      return group;
    };
    handle.layers.probeLabels = handle.probeLabels(data.existing || []);

    var overlays = {};
    [["site", "Site outline"], ["zones", "Zones"], ["areas", "Areas of interest"],
     ["exclusions", "Exclusions"], ["cells", "Cells of the elements"], ["elements", "Design elements"],
     ["labels", "Labels"], ["existing", "Existing probes"],
     ["probeLabels", "Probe ids"]].forEach(function (pair) {
      var layer = handle.layers[pair[0]];
      var crowded = pair[0] === "probeLabels" && layer.getLayers().length > 60;
      if (!crowded) layer.addTo(map);
      if (pair[0] === "site" || layer.getLayers().length) overlays[pair[1]] = layer;
    });
    handle.layers.layouts = {};
    if (options.layouts && data.layouts) {
      data.layouts.forEach(function (layout) {
        var group = handle.addProbes(layout.probes, { planned: true });
        handle.layers.layouts[layout.name] = group;
        overlays["Layout: " + layout.name] = group;
      });
    }
    handle.layerControl = L.control.layers(null, overlays, { collapsed: true, position: "topright" }).addTo(map);
    new ScaleControl().addTo(map);
    new ReadoutControl(handle).addTo(map);

    handle.fit = function () {
      var b = data.bounds || [0, 0, 100, 100];
      var bounds = L.latLngBounds(handle.toLatLng(b[0], b[1]), handle.toLatLng(b[2], b[3]));
      map.fitBounds(bounds.pad(0.05), { animate: false });
    };
    var viewKey = options.viewKey ||
      (window.location.pathname + "#" + (element.getAttribute("data-map-key") || element.id || ""));
    var saved = savedViews[viewKey];
    if (saved && options.keepView !== false) {
      map.setView(saved.center, saved.zoom, { animate: false });
    } else {
      handle.fit();
    }
    ensureHatch(element); // the layers (and Leaflet's svg) exist once the map has a view
    spreadTags();
    map.on("moveend", function () {
      savedViews[viewKey] = { center: map.getCenter(), zoom: map.getZoom() };
    });

    handle.onClick = function (fn) {
      handle.clickHandlers.push(fn);
    };
    map.on("click", function (event) {
      var point = handle.toProject(event.latlng);
      handle.clickHandlers.forEach(function (fn) { fn(point, event); });
    });
    handle.remove = function () {
      var at = handles.indexOf(handle);
      if (at >= 0) handles.splice(at, 1);
      map.remove();
      delete element._probewiseMap;
    };
    element._probewiseMap = handle;
    handles.push(handle);
    element.dispatchEvent(new CustomEvent("probewise:map-ready", { bubbles: true, detail: handle }));
    return handle;
  }

  function get(element) {
    return element && element._probewiseMap ? element._probewiseMap : null;
  }

  function fromElement(element) {
    if (get(element)) return;
    var options = { layouts: element.getAttribute("data-map-layouts") === "true" };
    var inline = element.getAttribute("data-map");
    var jsonId = element.getAttribute("data-map-json");
    var url = element.getAttribute("data-map-url");
    if (inline) {
      try {
        create(element, JSON.parse(inline), options);
      } catch (err) {
        element.textContent = "The map could not be drawn: " + err.message;
      }
    } else if (jsonId) {
      var island = document.getElementById(jsonId);
      if (!island) return;
      try {
        create(element, JSON.parse(island.textContent), options);
      } catch (err) {
        element.textContent = "The map could not be drawn: " + err.message;
      }
    } else if (url) {
      fetch(url, { headers: { Accept: "application/json" }, credentials: "same-origin" })
        .then(function (answer) {
          if (!answer.ok) throw new Error("the server answered " + answer.status);
          return answer.json();
        })
        .then(function (data) { create(element, data, options); })
        .catch(function (err) { element.textContent = "The map could not be loaded: " + err.message; });
    }
  }

  function initAll(root) {
    var scope = root && root.querySelectorAll ? root : document;
    var selector = ".pw-map[data-map], .pw-map[data-map-json], .pw-map[data-map-url]";
    var found = scope.querySelectorAll(selector);
    if (scope.matches && scope.matches(selector)) fromElement(scope);
    Array.prototype.forEach.call(found, fromElement);
  }

  // Drop the maps a swap is about to remove (their listeners would otherwise linger).
  document.addEventListener("htmx:beforeSwap", function (event) {
    var target = event.detail && event.detail.target;
    if (!target) return;
    handles.slice().forEach(function (handle) {
      if (target === handle.element || target.contains(handle.element)) handle.remove();
    });
  });
  document.addEventListener("htmx:load", function (event) { initAll(event.target); });
  // Deferred scripts run before DOMContentLoaded: wait for it, so page scripts loaded after
  // this one can listen for "probewise:map-ready" first.
  if (document.readyState === "complete") {
    initAll(document);
  } else {
    document.addEventListener("DOMContentLoaded", function () { initAll(document); });
  }

  window.ProbewiseMap = {
    create: create,
    get: get,
    initAll: initAll,
    probeIcon: probeIcon,
    formatNumber: formatNumber
  };
})();
