/* levelfield chart loader: draws every chart of the page from the Vega-Lite spec embedded
   beside it (<script type="application/json">) with the local Vega runtime. No network. */
(function () {
  "use strict";

  function note(view, text) {
    var p = document.createElement("p");
    p.className = "chart-note";
    p.textContent = text;
    view.appendChild(p);
  }

  var config = null;

  /* The look shared by every chart of the page (fonts, colours, axes), embedded once as
     <script type="application/json" id="chart-config"> instead of in each spec. */
  function pageConfig() {
    if (config === null) {
      var holder = document.getElementById("chart-config");
      try {
        config = holder ? JSON.parse(holder.textContent) : {};
      } catch (err) {
        config = {};
        console.error("levelfield: unreadable chart config", err);
      }
    }
    return config;
  }

  function draw(view) {
    var holder = document.getElementById(view.getAttribute("data-spec"));
    if (!holder) {
      return;
    }
    var spec;
    try {
      spec = JSON.parse(holder.textContent);
    } catch (err) {
      view.classList.add("chart-failed");
      note(view, "This chart could not be read; the data table below holds its numbers.");
      console.error("levelfield: unreadable chart spec", holder.id, err);
      return;
    }
    window.vegaEmbed(view, spec, { actions: false, renderer: "svg", config: pageConfig() }).then(function () {
      view.classList.add("chart-ready");
    }).catch(function (err) {
      view.classList.add("chart-failed");
      note(view, "This chart could not be drawn; the data table below holds its numbers.");
      console.error("levelfield: chart failed", holder.id, err);
    });
  }

  function start() {
    var views = document.querySelectorAll(".chart-view[data-spec]");
    if (typeof window.vegaEmbed !== "function") {
      for (var i = 0; i < views.length; i++) {
        note(views[i], "Charts are unavailable (the chart runtime did not load); the data tables hold the numbers.");
      }
      return;
    }
    for (var j = 0; j < views.length; j++) {
      draw(views[j]);
    }
  }

  if (document.readyState === "loading") {
    document.addEventListener("DOMContentLoaded", start);
  } else {
    start();
  }
})();
