/* arcwindow client-side helpers: the address bar (window and sequence pages), slider labels and
   names, the copy-link buttons, PNG downloads with the caution, the upload size check, going to
   the page of a case, refused controls marked for screen readers. Dates on the sliders are days
   since 1970-01-01 UTC. */
(function () {
  var MINUTES_PER_DAY = 1440;
  var MS_PER_MINUTE = 60000;

  function noUpdate() { return window.dash_clientside.no_update; }

  function isoOfDays(days) {
    var ms = Math.round(days * MINUTES_PER_DAY) * MS_PER_MINUTE;
    var iso = new Date(ms).toISOString();
    return iso.slice(11, 16) === "00:00" ? iso.slice(0, 10) : iso.slice(0, 16).replace("T", " ");
  }

  function errorBox(text) {
    return {
      type: "Div", namespace: "dash_html_components",
      props: { className: "aw-message-error", children: text }
    };
  }

  function sizeText(bytes) {
    return bytes >= 1048576 ? (bytes / 1048576).toFixed(1) + " MiB"
                            : Math.round(bytes / 1024) + " KiB";
  }

  // Range-slider handles named for what they move (screen readers read the name).
  var SLIDER_NAMES = {
    "slider-departure-range": ["first departure date", "last departure date"],
    "slider-arrival-range": ["first arrival date", "last arrival date"]
  };
  function nameSliderHandles() {
    Object.keys(SLIDER_NAMES).forEach(function (id) {
      var box = document.getElementById(id);
      if (!box) { return; }
      var handles = box.querySelectorAll("[role=slider]");
      for (var k = 0; k < handles.length && k < 2; k++) {
        var name = SLIDER_NAMES[id][k] + " (UTC)";
        if (handles[k].getAttribute("aria-label") !== name) {
          handles[k].setAttribute("aria-label", name);
        }
        var now = parseFloat(handles[k].getAttribute("aria-valuenow"));
        var text = isFinite(now) ? isoOfDays(now) + " UTC" : "";
        if (text && handles[k].getAttribute("aria-valuetext") !== text) {
          handles[k].setAttribute("aria-valuetext", text);
        }
      }
    });
  }
  new MutationObserver(nameSliderHandles).observe(document.documentElement,
    { childList: true, subtree: true, attributes: true, attributeFilter: ["aria-valuenow"] });

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
        var minutes = days * MINUTES_PER_DAY;
        return minutes >= 60 ? (minutes / 60).toFixed(2) + " h" : minutes.toFixed(1) + " min";
      }
      var d = text(dep), a = text(arr);
      if (!d && !a) { return ""; }
      return "Steps: departure " + (d || dep + " d") + ", arrival " + (a || arr + " d") + ".";
    },

    // The window page's view, in the address bar; replaced, never pushed, so the browser's
    // Back button leaves the page rather than stepping through every click.
    replaceQuery: function (query) {
      if (typeof query === "string" && query.charAt(0) === "?" &&
          window.location.pathname === "/" && window.location.search !== query) {
        window.history.replaceState(window.history.state, "", "/" + query);
      }
      return noUpdate();
    },

    // An answer of the view callback or of the grid poll (window_page.py `_answer`), applied
    // only while the tab shows the answer's view: a late answer for a view the tab has left
    // changes nothing (the new view's own answer set its status, pace and progress). Each
    // applied answer arms exactly one more tick of the poll (max_intervals), so one poll is in
    // flight at a time and no answer is dropped by the next tick's request. Returns the grid
    // status, the poll's disabled, interval and max_intervals, then the progress properties
    // named by `progressKeys`.
    acceptGridAnswer: function (answer, current, ticks, progressKeys) {
      var keys = progressKeys || [];
      var nothing = [noUpdate(), noUpdate(), noUpdate(), noUpdate()].concat(
        keys.map(function () { return noUpdate(); }));
      var view = current && typeof current.view === "string" ? current.view : "";
      if (!answer || answer.view !== view) { return nothing; }
      var status = answer.status && JSON.stringify(answer.status) !== JSON.stringify(current)
        ? answer.status : noUpdate();
      var stop = typeof answer.poll_ms !== "number";
      var progress = answer.progress || {};
      return [status, stop, stop ? noUpdate() : answer.poll_ms, (ticks || 0) + 1].concat(
        keys.map(function (k) { return k in progress ? progress[k] : noUpdate(); }));
    },

    // The sequence page's poll: a status the poll moved on becomes the tab's status, unless the
    // view changed while the poll was on its way (the new view has its own status already).
    acceptPolled: function (polled, current) {
      if (!polled || !current || polled.view !== current.view) { return noUpdate(); }
      if (JSON.stringify(polled) === JSON.stringify(current)) { return noUpdate(); }
      return polled;
    },

    // The poll's watchdog: a view still polling whose last poll has had no answer for
    // POLL_STALL_MS (a request lost on the network or failed on the server) gets one more tick,
    // whose request replaces the lost one; otherwise the poll would wait for ever.
    pollWatchdog: function (beat, ticks, maxTicks, disabled) {
      var POLL_STALL_MS = 20000;
      var now = Date.now();
      var watch = window.arcwindow.pollWatch;
      var armed = typeof maxTicks === "number" && maxTicks >= 0 && ticks < maxTicks;
      if (!watch || disabled || armed || watch.ticks !== ticks) {
        window.arcwindow.pollWatch = { ticks: ticks, since: now };
        return noUpdate();
      }
      if (now - watch.since < POLL_STALL_MS) { return noUpdate(); }
      watch.since = now;
      return (ticks || 0) + 1;
    },

    // The sequence page's view in the address bar (replaced, never pushed); once the shown
    // candidate is known, its own dates are added when the view does not carry them, so a
    // copied link names the trajectory and not only its rank in a search.
    replaceSequenceQuery: function (query, resolved) {
      if (typeof query !== "string" || query.charAt(0) !== "?" ||
          window.location.pathname !== "/sequence") { return noUpdate(); }
      var full = query;
      if (resolved && typeof resolved === "object" && resolved.view === query &&
          query.indexOf("&at=") < 0) {
        ["seq", "at", "arcs", "res"].forEach(function (name) {
          if (typeof resolved[name] === "string" && resolved[name]) {
            full += "&" + name + "=" + encodeURIComponent(resolved[name])
              .replace(/%7E/gi, "~").replace(/%3A/gi, ":").replace(/%2F/gi, "/")
              .replace(/%2C/gi, ",").replace(/%2A/gi, "*");
          }
        });
      }
      if (window.location.search !== full) {
        window.history.replaceState(window.history.state, "", "/sequence" + full);
      }
      return noUpdate();
    },

    // Another page of the app for a case it shows (a one-leg case picked on the sequence
    // page, a sequence picked on the window page).
    goTo: function (href) {
      if (typeof href === "string" && href.charAt(0) === "/" && href.charAt(1) !== "/") {
        window.location.assign(href);
      }
      return noUpdate();
    },

    replaceSurveyQuery: function (name) {
      if (typeof name === "string" && name && window.location.pathname.indexOf("/survey") === 0) {
        var query = "?results=" + encodeURIComponent(name);
        if (window.location.search !== query) {
          window.history.replaceState(window.history.state, "", window.location.pathname + query);
        }
      }
      return noUpdate();
    },

    copyLink: function (n, buttonId) {
      var url = window.location.href;
      var button = buttonId || "button-copy-link";
      function copied(text) {
        window.dash_clientside.set_props(button, { children: text });
        window.setTimeout(function () {
          window.dash_clientside.set_props(button, { children: "Copy link to this view" });
        }, 2500);
      }
      if (navigator.clipboard && window.isSecureContext) {
        navigator.clipboard.writeText(url).then(function () { copied("Link copied"); },
          function () { copied("Copy failed: select the address bar"); });
      } else {  // plain http on a team's network: the older copy command still works
        var area = document.createElement("textarea");
        area.value = url;
        document.body.appendChild(area);
        area.select();
        var ok = false;
        try { ok = document.execCommand("copy"); } catch (e) { ok = false; }
        document.body.removeChild(area);
        copied(ok ? "Link copied" : "Copy failed: select the address bar");
      }
      return noUpdate();
    },

    // A PNG of a figure, named after the case and the view, with the caution printed under it.
    downloadPng: function (buttonId, stem) {
      var graphs = {
        "button-png-map": ["graph-window-map", "window_map"],
        "button-png-arcview": ["graph-arc-view", "arc_view"],
        "button-png-family": ["graph-family-chart", "family_chart"],
        "button-seq-png-arcview": ["graph-seq-arc-view", "arc_view"],
        "button-seq-png-encounters": ["graph-seq-encounters", "encounter_chart"],
        "button-seq-png-legmap": ["graph-seq-leg-map", "leg_map"],
        "button-seq-png-family": ["graph-seq-family", "family_chart"]
      };
      var entry = graphs[buttonId];
      var gd = entry && document.querySelector("#" + entry[0] + " .js-plotly-plot");
      if (!gd || !window.Plotly) { return noUpdate(); }
      var banner = document.getElementById("div-caution-banner") ||
        document.getElementById("div-seq-caution");
      var caution = banner ? banner.innerText.replace(/\s+/g, " ").trim() : "";
      var words = caution.split(" "), lines = [""];
      words.forEach(function (w) {
        if ((lines[lines.length - 1] + " " + w).length > 110) { lines.push(w); }
        else { lines[lines.length - 1] = (lines[lines.length - 1] + " " + w).trim(); }
      });
      var extra = 16 * lines.length + 12;
      var full = gd._fullLayout;
      var layout = Object.assign({}, gd.layout);
      var margin = Object.assign({}, full.margin);
      margin.b = (margin.b || 0) + extra;
      layout.margin = margin;
      layout.annotations = (gd.layout.annotations || []).concat([{
        text: lines.join("<br>"), showarrow: false, xref: "paper", yref: "paper",
        x: 0, y: 0, xanchor: "left", yanchor: "top", align: "left",
        yshift: -(margin.b - extra) - 6, font: { size: 11, color: "#6b4e00" }
      }]);
      var name = (stem || "arcwindow") + "_" + entry[1];
      window.Plotly.toImage({ data: gd.data, layout: layout }, {
        format: "png", width: full.width, height: full.height + extra, scale: 2
      }).then(function (url) {
        var link = document.createElement("a");
        link.href = url;
        link.download = name + ".png";
        document.body.appendChild(link);
        link.click();
        document.body.removeChild(link);
      });
      return noUpdate();
    },

    // An upload over the size limit is refused here, with its size, before it is sent.
    checkUpload: function (contents, filename, maxBytes) {
      if (!contents) { return [noUpdate(), noUpdate()]; }
      var name = (filename || "the file").slice(0, 60);
      var payload = contents.slice(contents.indexOf(",") + 1);
      var bytes = Math.floor(payload.length * 3 / 4);
      if (bytes > maxBytes) {
        return [null, errorBox(name + " was not loaded: upload = '" + name + " (" +
          sizeText(bytes) + ")' is not accepted; expected a case file under " +
          Math.round(maxBytes / 1024) + " KiB")];
      }
      return [{ contents: contents, filename: name, at: Date.now() }, ""];
    },

    // Refused values: each control says so to screen readers and points at its message.
    markInvalid: function (errors) {
      errors = errors || {};
      document.querySelectorAll("[data-setting]").forEach(function (field) {
        var message = field.querySelector(".aw-field-error");
        if (!message) { return; }
        var url = message.id.replace("text-error-", "");
        var bad = Boolean(errors[url]);
        field.classList.toggle("aw-field-invalid", bad);
        field.querySelectorAll("input").forEach(function (input) {
          if (input.type === "hidden") { return; }
          if (bad) {
            input.setAttribute("aria-invalid", "true");
            input.setAttribute("aria-describedby", message.id);
          } else {
            input.removeAttribute("aria-invalid");
          }
        });
      });
      return noUpdate();
    }
  };
})();
