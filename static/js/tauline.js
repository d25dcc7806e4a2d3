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

  document.addEventListener("DOMContentLoaded", function () {
    drawCharts(document);
    followRuns();
    previewInPlace();
  });
})();
