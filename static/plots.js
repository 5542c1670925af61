// Draw every figure the page placed: a <div data-figure="ID"> whose figure JSON sits in
// <script type="application/json" id="ID">. No inline script, so a strict CSP holds.
(function () {
  "use strict";

  function draw() {
    if (typeof window.Plotly === "undefined") {
      return;
    }
    var nodes = document.querySelectorAll("[data-figure]");
    Array.prototype.forEach.call(nodes, function (node) {
      var source = document.getElementById(node.getAttribute("data-figure"));
      if (!source) {
        return;
      }
      var fig = JSON.parse(source.textContent);
      window.Plotly.newPlot(node, fig.data, fig.layout, {
        responsive: true,
        displaylogo: false,
        modeBarButtonsToRemove: ["select2d", "lasso2d"],
        toImageButtonOptions: { format: "png", filename: node.id }
      });
    });
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", draw);
  } else {
    draw();
  }
})();
