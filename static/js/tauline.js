/* Tauline pages: draw charts, follow computation progress, preview a logger file in place.
   Everything here is enhancement: each page works without it. */
(function () {
  "use strict";

  var PLOT_CONFIG = { responsive: true, displaylogo: false, modeBarButtonsToRemove: ["lasso2d", "select2d"] };

  function draw(el, figure) {
    if (!window.Plotly || !figure) { return; }
    var fallback = el.querySelector(".chart-fallback");
    if (fallback) { fallback.remove(); }
    window.Plotly.newPlot(el, figure.data || [], figure.layout || {}, PLOT_CONFIG);
  }

  function drawCharts(root) {
    root.querySelectorAll("[data-chart]").forEach(function (el) {
      var source = document.getElementById(el.getAttribute("data-chart"));
      if (!source) { return; }
      try { draw(el, JSON.parse(source.textContent)); } catch (err) { console.error(err); }
    });
    // Figures embedded as a data attribute (the report pages).
    root.querySelectorAll(".plot[data-figure]").forEach(function (el) {
      try { draw(el, JSON.parse(el.getAttribute("data-figure"))); } catch (err) { console.error(err); }
    });
  }

  function followRuns() {
    var panel = document.getElementById("runs-panel");
    if (!panel || panel.getAttribute("data-busy") !== "1") { return; }
    var url = panel.getAttribute("data-poll-url");
    var status = document.getElementById("runs-status");
    function tick() {
      fetch(url, { headers: { "Accept": "application/json" }, credentials: "same-origin" })
        .then(function (response) { return response.ok ? response.json() : Promise.reject(response.status); })
        .then(function (body) {
          body.runs.forEach(function (run) {
            var row = panel.querySelector('[data-run="' + run.id + '"]');
            if (!row) { return; }
            var badge = row.querySelector(".badge");
            if (badge) { badge.textContent = run.state_label; badge.className = "badge " + run.state; }
            var bar = row.querySelector("progress");
            if (bar) { bar.value = run.progress_pct; bar.textContent = run.progress_pct + " %"; }
            var pct = row.querySelector(".pct");
            if (pct) { pct.textContent = run.progress_pct + " %"; }
          });
          if (body.busy) {
            window.setTimeout(tick, 2000);
          } else {
            if (status) { status.textContent = "Computation finished; showing the new results."; }
            window.location.reload();
          }
        })
        .catch(function () {
          if (status) { status.textContent = "Lost contact with the server; reload the page to see progress."; }
        });
    }
    window.setTimeout(tick, 2000);
  }

  function previewInPlace() {
    var form = document.getElementById("import-form");
    var button = document.getElementById("preview-button");
    var slot = document.getElementById("preview-slot");
    if (!form || !button || !slot || !window.fetch) { return; }
    button.addEventListener("click", function (event) {
      event.preventDefault();
      if (!form.reportValidity()) { return; }
      slot.textContent = "Reading the file…";
      fetch(button.getAttribute("formaction") + "?fragment=1", {
        method: "POST", body: new FormData(form), credentials: "same-origin"
      })
        .then(function (response) { return response.text(); })
        .then(function (html) {
          var template = document.createElement("template");
          template.innerHTML = html;
          slot.replaceChildren(template.content);
          slot.focus();
        })
        .catch(function () { slot.textContent = "The preview could not be loaded; use Import to check the file."; });
    });
  }

  /* The manual-entry grid: reduced values while typing (debounced POST of the grid), "Add 10 rows"
     in place, Enter moves down a row, and a multi-line paste (tabs or commas) spreads over the
     grid from the cell it lands in. Without this script the same buttons work by round trip. */
  function entryGrid() {
    var form = document.getElementById("entry-grid");
    if (!form || !window.fetch || !window.FormData) { return; }
    var url = form.getAttribute("data-reduce-url");
    var status = document.getElementById("grid-status");
    var shear = form.querySelector('tbody[data-grid="shear"]');
    var timer = null;
    var sent = 0;

    function rowsOf(body) { return Array.prototype.slice.call(body.querySelectorAll("tr[data-row]")); }
    function cellsOf(tr) { return Array.prototype.slice.call(tr.querySelectorAll("input.cell")); }
    function show(tr, key, text) {
      var el = tr.querySelector('[data-out="' + key + '"]');
      if (el) { el.textContent = text; }
    }

    function reduce() {
      var mine = ++sent;
      fetch(url, { method: "POST", body: new FormData(form), credentials: "same-origin",
                   headers: { "Accept": "application/json" } })
        .then(function (response) { return response.ok ? response.json() : Promise.reject(response.status); })
        .then(function (body) {
          if (mine !== sent || !shear) { return; }
          var byRow = {};
          body.rows.forEach(function (r) { byRow[r.row] = r; });
          rowsOf(shear).forEach(function (tr) {
            var r = byRow[tr.getAttribute("data-row")];
            show(tr, "force_n", r && r.force_n !== null ? r.force_n.toFixed(1) : "");
            show(tr, "shear_stress_kpa", r && r.shear_stress_kpa !== null ? r.shear_stress_kpa.toFixed(1) : "");
            show(tr, "note", r ? r.note : "");
          });
          if (status) { status.textContent = ""; }
        })
        .catch(function () {
          if (mine === sent && status) {
            status.textContent = "Reduced values could not be worked out just now; they show after saving or with \u201cShow reduced values\u201d.";
          }
        });
    }
    function later() {
      window.clearTimeout(timer);
      timer = window.setTimeout(reduce, 250);
    }

    function addRows(body, count) {
      var rows = rowsOf(body);
      var last = rows[rows.length - 1];
      var first = null;
      for (var k = 0; k < count; k++) {
        var n = rows.length + k + 1;
        var tr = last.cloneNode(true);
        tr.setAttribute("data-row", String(n));
        tr.classList.remove("bad");
        tr.querySelector("th").textContent = String(n);
        cellsOf(tr).forEach(function (input) {
          input.name = input.name.replace(/-\d+-/, "-" + n + "-");
          input.id = input.id.replace(/-\d+-/, "-" + n + "-");
          input.setAttribute("aria-label", input.getAttribute("aria-label").replace(/row \d+/, "row " + n));
          input.removeAttribute("aria-invalid");
          input.removeAttribute("aria-describedby");
          input.value = "";
        });
        tr.querySelectorAll("[data-out]").forEach(function (el) { el.textContent = ""; });
        tr.querySelectorAll(".problem").forEach(function (el) { el.remove(); });
        var note = tr.querySelector(".row-note");
        if (note) { note.id = note.id.replace(/-\d+-/, "-" + n + "-"); }
        body.appendChild(tr);
        if (!first) { first = tr; }
      }
      return first;
    }

    form.querySelectorAll("[data-add-rows]").forEach(function (button) {
      button.addEventListener("click", function (event) {
        event.preventDefault();
        var body = form.querySelector('tbody[data-grid="' + button.getAttribute("data-add-rows") + '"]');
        var first = addRows(body, 10);
        if (first) { cellsOf(first)[0].focus(); }
        if (status) { status.textContent = "10 rows added."; }
      });
    });

    form.addEventListener("input", function (event) {
      if (shear && shear.contains(event.target)) { later(); }
    });

    form.addEventListener("keydown", function (event) {
      var input = event.target;
      if (event.key !== "Enter" || !input.classList || !input.classList.contains("cell")) { return; }
      event.preventDefault();
      var tr = input.closest("tr");
      var next = tr.nextElementSibling;
      if (!next) { next = addRows(tr.parentNode, 10); }
      cellsOf(next)[cellsOf(tr).indexOf(input)].focus();
    });

    form.addEventListener("paste", function (event) {
      var input = event.target;
      if (!input.classList || !input.classList.contains("cell")) { return; }
      var text = (event.clipboardData || window.clipboardData).getData("text");
      var lines = text.replace(/\r\n?/g, "\n").replace(/\n+$/, "").split("\n");
      var tabbed = text.indexOf("\t") >= 0;
      if (!tabbed && lines.length < 2 && (text.match(/[,;]/g) || []).length < 2) { return; }
      event.preventDefault();
      var tr = input.closest("tr");
      var body = tr.parentNode;
      var column = cellsOf(tr).indexOf(input);
      var start = rowsOf(body).indexOf(tr);
      var needed = start + lines.length - rowsOf(body).length;
      if (needed > 0) { addRows(body, Math.ceil(needed / 10) * 10); }
      var rows = rowsOf(body);
      lines.forEach(function (line, i) {
        var values = tabbed ? line.split("\t") : line.split(/[,;]/);
        var cells = cellsOf(rows[start + i]);
        values.forEach(function (value, j) {
          if (cells[column + j]) { cells[column + j].value = value.trim(); }
        });
      });
      if (status) { status.textContent = lines.length + " pasted row(s) spread over the grid."; }
      if (body === shear) { later(); }
    });
  }

  document.addEventListener("DOMContentLoaded", function () {
    drawCharts(document);
    followRuns();
    previewInPlace();
    entryGrid();
  });
})();
