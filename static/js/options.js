// Options page: the selected layout's probes on the site map (static/js/sitemap.js draws the
// site). Click the map to add a probe (method from the "Add a probe" form), drag a probe to
// move it, click one to change its method or remove it. Every change posts to the server with
// the revision the page shows; the answer is the page's #options fragment, whose map is drawn
// again (sitemap.js keeps the view). The table under the map does the same from the keyboard.
(function () {
  "use strict";

  var LABELS_UP_TO = 30; // probes labelled at the first view
  var pendingPost = false; // a POST into #options is on its way: show its message as a flash

  var setFlash = window.Probewise.setFlash;
  var readJson = window.Probewise.readJson;

  function probesData() {
    return readJson("options-probes-data") || { probes: [] };
  }

  function post(url, values) {
    var data = probesData();
    values.expected_revision = String(data.revision);
    values.layout = data.layout || "";
    if (typeof htmx === "undefined") return;
    htmx.ajax("POST", url, { target: "#options", swap: "outerHTML", values: values });
  }

  function methodIds() {
    var select = document.getElementById("add-method");
    if (!select) return [];
    return Array.prototype.map.call(select.options, function (o) { return o.value; });
  }

  function fixed(value) {
    return (Math.round(value * 10) / 10).toFixed(1);
  }

  // The shared probe symbol with the probe's id beside it.
  function labelledIcon(kind, id, method) {
    var base = window.ProbewiseMap.probeIcon(kind, { planned: true, code: method });
    var label = document.createElement("span");
    label.className = "pin-label";
    label.textContent = id;
    return L.divIcon({
      html: base.options.html + label.outerHTML,
      className: "pw-probe-icon pw-probe-labelled",
      iconSize: base.options.iconSize,
      iconAnchor: base.options.iconAnchor,
    });
  }

  function popupFor(probe, data) {
    var root = document.createElement("div");
    root.className = "probe-popup";
    var title = document.createElement("p");
    var strong = document.createElement("strong");
    strong.textContent = probe.id;
    title.appendChild(strong);
    title.appendChild(document.createTextNode(" " + probe.method + " at " + fixed(probe.x) + ", " + fixed(probe.y) + " m"));
    root.appendChild(title);
    var row = document.createElement("p");
    var label = document.createElement("label");
    label.textContent = "Method ";
    var select = document.createElement("select");
    methodIds().forEach(function (id) {
      var option = document.createElement("option");
      option.value = id;
      option.textContent = id;
      if (id === probe.method) option.selected = true;
      select.appendChild(option);
    });
    label.appendChild(select);
    row.appendChild(label);
    row.appendChild(document.createTextNode(" "));
    var change = document.createElement("button");
    change.type = "button";
    change.textContent = "Change";
    change.addEventListener("click", function () {
      post(data.urls.update, { probe: probe.id, method: select.value });
    });
    row.appendChild(change);
    root.appendChild(row);
    var remove = document.createElement("button");
    remove.type = "button";
    remove.className = "danger";
    remove.textContent = "Remove " + probe.id;
    remove.addEventListener("click", function () {
      post(data.urls.remove, { probe: probe.id });
    });
    root.appendChild(remove);
    var hint = document.createElement("p");
    hint.className = "help";
    hint.textContent = "Drag the symbol to move the probe.";
    root.appendChild(hint);
    return root;
  }

  function drawProbes(handle) {
    var data = probesData();
    var group = L.featureGroup();
    (data.probes || []).forEach(function (probe) {
      var text = probe.id + " (" + probe.method + ") at " + fixed(probe.x) + ", " + fixed(probe.y);
      var marker = L.marker(handle.toLatLng(probe.x, probe.y), {
        icon: labelledIcon(probe.kind, probe.id, probe.method),
        draggable: !!data.editable,
        keyboard: true,
        title: text,
        alt: text,
        riseOnHover: true,
        autoPan: true,
      });
      if (data.editable) {
        marker.bindPopup(function () { return popupFor(probe, data); });
        marker.on("dragend", function () {
          var p = handle.toProject(marker.getLatLng());
          post(data.urls.update, { probe: probe.id, x: p.x.toFixed(2), y: p.y.toFixed(2) });
        });
      }
      group.addLayer(marker);
    });
    group.addTo(handle.map);
    // Many probes: their labels would cover the map, so they show once zoomed in (the symbol's
    // title names the probe meanwhile).
    var container = handle.map.getContainer();
    var crowded = (data.probes || []).length > LABELS_UP_TO;
    var labelZoom = handle.map.getZoom() + 1;
    function updateLabels() {
      container.classList.toggle("pin-labels-off", crowded && handle.map.getZoom() < labelZoom);
    }
    handle.map.on("zoomend", updateLabels);
    updateLabels();
    if (data.editable) {
      handle.map.getContainer().classList.add("is-editable");
      handle.onClick(function (point) {
        var select = document.getElementById("add-method");
        if (!select) return;
        post(data.urls.add, { method: select.value, x: point.x.toFixed(2), y: point.y.toFixed(2) });
      });
    }
  }

  document.addEventListener("probewise:map-ready", function (event) {
    // (the map element has no id: htmx would copy Leaflet's inline style onto its successor)
    if (event.target && event.target.classList.contains("options-map")) drawProbes(event.detail);
  });

  document.addEventListener("htmx:beforeRequest", function (event) {
    var config = event.detail && event.detail.requestConfig;
    var target = event.detail && event.detail.target;
    pendingPost = !!(config && config.verb === "post" && target && target.id === "options");
  });

  // A refusal or a warning shows where the pointer is too, not only at the top of the page.
  document.addEventListener("htmx:load", function (event) {
    if (!pendingPost || !event.target || event.target.id !== "options") return;
    pendingPost = false;
    var notice = event.target.querySelector(".edit-head ~ .notice-error, .edit-head ~ .notice-warning");
    if (notice) setFlash(notice.classList.contains("notice-error") ? "error" : "warning", notice.textContent.trim());
  });
})();
