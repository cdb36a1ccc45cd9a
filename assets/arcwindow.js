/* arcwindow client-side helpers: slider labels, PNG downloads. Dates on the sliders are days
   since 1970-01-01 UTC. */
(function () {
  function isoOfDays(days) {
    var ms = Math.round(days * 1440) * 60000;
    var iso = new Date(ms).toISOString();
    return iso.slice(11, 16) === "00:00" ? iso.slice(0, 10) : iso.slice(0, 16).replace("T", " ");
  }
  window.dccFunctions = window.dccFunctions || {};
  window.dccFunctions.arcwindowDate = function (value) { return isoOfDays(value); };
  window.arcwindow = {
    rangeText: function (range) {
      if (!range || range.length !== 2) { return ""; }
      var span = range[1] - range[0];
      var length = span >= 2 ? Math.round(span) + " d" : (span * 24).toFixed(1) + " h";
      return isoOfDays(range[0]) + " → " + isoOfDays(range[1]) + " (" + length + ")";
    },
    stepHint: function (dep, arr) {
      function text(days) {
        if (typeof days !== "number" || !(days > 0) || days >= 1) { return null; }
        var minutes = days * 1440;
        return minutes >= 60 ? (minutes / 60).toFixed(2) + " h" : minutes.toFixed(1) + " min";
      }
      var d = text(dep), a = text(arr);
      if (!d && !a) { return ""; }
      return "Steps: departure " + (d || dep + " d") + ", arrival " + (a || arr + " d") + ".";
    },
    downloadPng: function (buttonId) {
      var graphs = {
        "button-png-map": ["graph-window-map", "window_map"],
        "button-png-arcview": ["graph-arc-view", "arc_view"],
        "button-png-family": ["graph-family-chart", "family_chart"]
      };
      var entry = graphs[buttonId];
      if (!entry) { return window.dash_clientside.no_update; }
      var div = document.querySelector("#" + entry[0] + " .js-plotly-plot");
      if (div && window.Plotly) {
        window.Plotly.downloadImage(div, { format: "png", filename: entry[1], scale: 2 });
      }
      return window.dash_clientside.no_update;
    }
  };
})();
