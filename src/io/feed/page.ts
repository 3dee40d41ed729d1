// The live page the feed server serves: position, velocity and signal level as numbers (with the low-signal
// threshold named and a short level-over-time trace), the quadrature (Lissajous) figures raw and corrected with
// their scales, and the alarm log with units, where a flood of raise/clear pairs is one row with counts.
// Everything inline; it talks only to its own origin. Readable from 320 px (a phone) up; times are 24-hour ISO.

/** The page, with `nonce` on its inline style and script (the server's Content-Security-Policy allows only those). */
export function feedPage(nonce: string): string {
  return `<!doctype html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>fringetally live feed</title>
<link rel="icon" href="data:,">
<style nonce="${nonce}">
  :root { --ink: #1d232a; --muted: #56616c; --line: #c9d0d6; --panel: #ffffff; --page: #eef1f3;
          --raw: #0b6e99; --corr: #1a7f37; --warn: #9a4d00; --alarm: #b3261e; }
  * { box-sizing: border-box; }
  body { margin: 0; font: 15px/1.4 system-ui, sans-serif; color: var(--ink); background: var(--page); }
  header { display: flex; flex-wrap: wrap; gap: 4px 16px; align-items: baseline; padding: 10px 16px; background: var(--panel); border-bottom: 1px solid var(--line); }
  header h1 { font-size: 16px; margin: 0; }
  #link { font-weight: 700; }
  #link[data-state="live"] { color: var(--corr); }
  #link[data-state="waiting"], #link[data-state="connecting"] { color: var(--warn); }
  #link[data-state="down"], #link[data-state="failed"] { color: var(--alarm); }
  #link[data-state="ended"] { color: var(--ink); }
  .muted { color: var(--muted); }
  main { padding: 12px; display: grid; gap: 12px; max-width: 1400px; }
  .axis { background: var(--panel); border: 1px solid var(--line); border-radius: 4px; padding: 10px 12px; display: grid;
          grid-template-columns: repeat(auto-fit, minmax(260px, 1fr)); gap: 12px; align-items: start; }
  .axis h2 { grid-column: 1 / -1; margin: 0; font-size: 16px; }
  figure { margin: 0; min-width: 0; }
  figcaption { font-size: 13px; color: var(--muted); }
  canvas { display: block; width: 100%; max-width: 320px; height: auto; border: 1px solid var(--line); background: #fbfcfd; }
  canvas.levels { max-width: 480px; }
  dl { grid-column: 1 / -1; margin: 0; display: grid; grid-template-columns: max-content minmax(0, 1fr); gap: 4px 16px; min-width: 0; }
  dt { color: var(--muted); }
  dd { margin: 0; font: 16px/1.35 ui-monospace, monospace; overflow-wrap: anywhere; }
  dd.position { font-size: 26px; font-weight: 600; }
  dd.level[data-low="true"] { color: var(--alarm); font-weight: 700; }
  .alarms b { color: var(--alarm); font-weight: 700; margin-right: 6px; }
  section.log { background: var(--panel); border: 1px solid var(--line); border-radius: 4px; padding: 10px 12px; overflow-x: auto; }
  section.log h2 { margin: 0 0 6px; font-size: 16px; }
  table { border-collapse: collapse; width: 100%; font: 13px ui-monospace, monospace; }
  th, td { text-align: left; padding: 2px 8px; border-bottom: 1px solid #e3e7ea; white-space: nowrap; }
  th { font: 12px system-ui, sans-serif; color: var(--muted); }
  td.log-state.raised { color: var(--alarm); }
  td.log-state.cleared { color: var(--corr); }
  @media (max-width: 1000px) {
    /* Cells wrap at their spaces (date, time, zone; value, unit) rather than push the log wider than the window. */
    #log-table th, #log-table td { white-space: normal; padding: 2px 4px; }
  }
  @media (max-width: 520px) {
    header { padding: 8px 10px; }
    main { padding: 8px; }
    dd.position { font-size: 22px; }
    /* Seven columns do not fit a phone: each log row becomes a small card, every value after its column's name. */
    #log-table thead { display: none; }
    #log-table, #log-table tbody, #log-table tr, #log-table td { display: block; width: auto; }
    #log-table tr { border-bottom: 1px solid var(--line); padding: 4px 0; }
    #log-table td { border: 0; padding: 1px 0; white-space: normal; overflow-wrap: anywhere; }
    #log-table td::before { content: attr(data-label) ": "; font: 12px system-ui, sans-serif; color: var(--muted); }
  }
</style>
</head>
<body>
<header>
  <h1>fringetally — live feed</h1>
  <span id="link" data-state="connecting">connecting…</span>
  <span class="muted" id="clock"></span>
  <span class="muted">read-only view</span>
</header>
<main id="axes"></main>
<main>
  <section class="log">
    <h2>Alarm log <span class="muted">(newest first; repeated raise/clear of one alarm is one row with counts)</span></h2>
    <table id="log-table"><thead><tr><th>last change (UTC)</th><th>sample time t</th><th>axis</th><th>alarm</th><th>state</th><th>value</th><th>raised / cleared</th></tr></thead><tbody id="log"></tbody></table>
  </section>
</main>
<script nonce="${nonce}">
"use strict";
(function () {
  var LOG_ROWS = 200, UPDATE_HZ = 20, LEVEL_SECONDS = 30, COLLAPSE_MS = 10000;
  var token = new URLSearchParams(location.search).get("token");
  var linkEl = document.getElementById("link"), clockEl = document.getElementById("clock");
  var axesEl = document.getElementById("axes"), logEl = document.getElementById("log");
  var views = {}, groups = [];
  var rateHz = null, lowLevel = 0.3, finalState = null, retryMs = 500;

  function el(tag, attrs, text) {
    var node = document.createElement(tag);
    for (var key in attrs) node.setAttribute(key, attrs[key]);
    if (text !== undefined) node.textContent = text;
    return node;
  }

  function setLink(state, text) { linkEl.setAttribute("data-state", state); linkEl.textContent = text; }

  // "2026-12-02T13:07:02.123Z" -> "2026-12-02 13:07:02.123 UTC": ISO 8601, 24-hour, the zone named.
  function isoTime(iso) { return iso.replace("T", " ").replace("Z", " UTC"); }
  function seconds(t) { return t === null ? "—" : t.toFixed(6) + " s"; }
  function fixed(value, digits) { return value === null ? "—" : value.toFixed(digits); }
  // Round scale for a figure: 1, 2 or 5 × 10^k at or above the peak.
  function niceScale(peak) {
    var p = Math.pow(10, Math.floor(Math.log(peak) / Math.LN10)), m = peak / p;
    return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p;
  }
  function group3(value) { return String(value).replace(/\\B(?=(\\d{3})+(?!\\d))/g, "\\u2009"); }

  function makeAxis(name) {
    var box = el("section", { "class": "axis", id: "axis-" + name });
    box.appendChild(el("h2", {}, "Axis " + name));
    var dl = el("dl");
    function row(label, cls) { dl.appendChild(el("dt", {}, label)); var dd = el("dd", { "class": cls }); dl.appendChild(dd); return dd; }
    var view = {
      position: row("Position", "position"), range: row("Range since last update", "range"),
      velocity: row("Velocity", "velocity"), level: row("Signal level", "level"),
      alarms: row("Alarms", "alarms"), time: row("Sample time", "time"),
      levels: [], rawScale: 0
    };
    box.appendChild(dl);
    function figure(cls, width, height, caption) {
      var canvas = el("canvas", { width: width, height: height, "class": cls });
      var f = el("figure"); f.appendChild(canvas);
      var cap = el("figcaption", {}, caption); var scale = el("span", { "class": cls + "-scale" }); cap.appendChild(scale);
      f.appendChild(cap); box.appendChild(f);
      return { canvas: canvas, scale: scale };
    }
    var raw = figure("raw", 320, 320, "Quadrature, raw: x across, y up, ADC counts. ");
    var corr = figure("corrected", 320, 320, "Quadrature, corrected: u across, v up; the circle is the calibrated radius 1. ");
    var levels = figure("levels", 400, 150, "Signal level over the last " + LEVEL_SECONDS + " s of samples (line: level, shade: lowest per update). ");
    view.raw = raw.canvas; view.rawScaleEl = raw.scale; view.corr = corr.canvas; view.corrScaleEl = corr.scale;
    view.levelCanvas = levels.canvas; view.levelScaleEl = levels.scale;
    corr.scale.textContent = "Scale ±1.3, ticks at 0.5.";
    axesEl.appendChild(box);
    frame(view.raw, 1, "", 4); frame(view.corr, 1.3, "", 0);
    return view;
  }

  // Frame, ticks and tick labels of an X-Y figure spanning ±scale; ticks every scale/2 (or 0.5 for the unit circle).
  function frame(canvas, scale, unit, ticks) {
    var g = canvas.getContext("2d"), w = canvas.width, h = canvas.height, m = 30;
    g.fillStyle = "#fbfcfd"; g.fillRect(0, 0, w, h);
    var inner = w - 2 * m;
    g.strokeStyle = "#c3cad1"; g.lineWidth = 1; g.strokeRect(m, m, inner, inner);
    g.strokeStyle = "#dfe4e8";
    g.beginPath(); g.moveTo(w / 2, m); g.lineTo(w / 2, h - m); g.moveTo(m, h / 2); g.lineTo(w - m, h / 2); g.stroke();
    g.fillStyle = "#56616c"; g.font = "11px system-ui, sans-serif"; g.textAlign = "center"; g.textBaseline = "top";
    var values = ticks > 0 ? [-scale, -scale / 2, 0, scale / 2, scale] : [-1, -0.5, 0, 0.5, 1];
    var text = function (v) { return ticks > 0 ? group3(v) : String(v); };
    // Long labels (ADC counts) on a small figure would run into each other: then only the ends and zero are labelled.
    var widest = Math.max.apply(null, values.map(function (v) { return g.measureText(text(v)).width; }));
    var labelHalves = ticks === 0 || 1.5 * widest + 6 <= inner / 4;
    values.forEach(function (v) {
      var px = w / 2 + (v / scale) * (inner / 2), py = h / 2 - (v / scale) * (inner / 2);
      g.strokeStyle = "#9aa4ad"; g.beginPath(); g.moveTo(px, h - m); g.lineTo(px, h - m + 4); g.moveTo(m - 4, py); g.lineTo(m, py); g.stroke();
      var label = text(v);
      if (!labelHalves && Math.abs(v) === scale / 2) return;
      // Labels at the ends run inwards, so the two axes' labels never meet at a corner.
      var along = ticks > 0 && v === -scale ? "left" : ticks > 0 && v === scale ? "right" : "center";
      g.textAlign = along; g.textBaseline = "top"; g.fillText(label, px, h - m + 6);
      g.save(); g.translate(m - 8, py); g.rotate(-Math.PI / 2); g.textAlign = along; g.textBaseline = "bottom"; g.fillText(label, 0, 0); g.restore();
    });
    if (ticks === 0) { g.strokeStyle = "#c3cad1"; g.beginPath(); g.arc(w / 2, h / 2, inner / 2 / scale, 0, 2 * Math.PI); g.stroke(); }
  }

  function plot(canvas, xs, ys, scale, colour) {
    var g = canvas.getContext("2d"), w = canvas.width, h = canvas.height, inner = w - 60;
    g.fillStyle = colour;
    for (var i = 0; i < xs.length; i++) {
      var px = w / 2 + (xs[i] / scale) * (inner / 2), py = h / 2 - (ys[i] / scale) * (inner / 2);
      g.fillRect(px - 1, py - 1, 2.5, 2.5);
    }
  }

  function drawLevels(view) {
    var canvas = view.levelCanvas, g = canvas.getContext("2d"), w = canvas.width, h = canvas.height;
    var left = 34, right = w - 8, top = 8, bottom = h - 22, top1 = 1.2;
    g.fillStyle = "#fbfcfd"; g.fillRect(0, 0, w, h);
    g.strokeStyle = "#c3cad1"; g.strokeRect(left, top, right - left, bottom - top);
    function y(level) { return bottom - Math.max(0, Math.min(top1, level)) / top1 * (bottom - top); }
    g.fillStyle = "#56616c"; g.font = "11px system-ui, sans-serif"; g.textAlign = "right"; g.textBaseline = "middle";
    [0, 0.5, 1].forEach(function (v) { g.fillText(v.toFixed(1), left - 4, y(v)); g.strokeStyle = "#e6eaed"; g.beginPath(); g.moveTo(left, y(v)); g.lineTo(right, y(v)); g.stroke(); });
    g.strokeStyle = "#b3261e"; g.setLineDash([5, 4]); g.beginPath(); g.moveTo(left, y(lowLevel)); g.lineTo(right, y(lowLevel)); g.stroke(); g.setLineDash([]);
    g.fillStyle = "#b3261e"; g.textAlign = "left"; g.textBaseline = "bottom"; g.fillText("low-signal threshold " + lowLevel.toFixed(2), left + 4, y(lowLevel) - 2);
    var points = view.levels;
    if (points.length === 0) return;
    // The last LEVEL_SECONDS of sample time, or all there is when less has passed.
    var tEnd = points[points.length - 1].t, tStart = Math.max(points[0].t, tEnd - LEVEL_SECONDS), span = Math.max(tEnd - tStart, 1e-9);
    function x(t) { return left + (t - tStart) / span * (right - left); }
    g.fillStyle = "#56616c"; g.textAlign = "center"; g.textBaseline = "top";
    g.fillText("t = " + tStart.toFixed(3) + " s", left + 40, bottom + 4); g.fillText(tEnd.toFixed(3) + " s", right - 30, bottom + 4);
    g.fillStyle = "rgba(26,127,55,0.18)";
    points.forEach(function (p) { if (p.min !== null) g.fillRect(x(p.t) - 1, y(p.level === null ? p.min : Math.max(p.level, p.min)), 2, y(p.min) - y(p.level === null ? p.min : Math.max(p.level, p.min)) + 1); });
    g.strokeStyle = "#1a7f37"; g.lineWidth = 1.5; g.beginPath();
    var started = false;
    points.forEach(function (p) {
      if (p.level === null) { started = false; return; }
      if (started) g.lineTo(x(p.t), y(p.level)); else { g.moveTo(x(p.t), y(p.level)); started = true; }
    });
    g.stroke(); g.lineWidth = 1;
  }

  function render(axis, update) {
    var view = views[axis.name] || (views[axis.name] = makeAxis(axis.name));
    var um = function (m) { return m === null ? null : m * 1e6; };
    view.position.textContent = fixed(um(axis.positionM), 3) + " µm";
    view.position.setAttribute("data-position-m", String(axis.positionM));
    view.range.textContent = fixed(um(axis.positionMinM), 3) + " … " + fixed(um(axis.positionMaxM), 3) + " µm";
    view.velocity.textContent = fixed(axis.velocityMS === null ? null : axis.velocityMS * 1e3, 3) + " mm/s";
    view.velocity.setAttribute("data-velocity-ms", String(axis.velocityMS));
    var low = axis.level !== null && axis.level < lowLevel;
    view.level.textContent = axis.level === null ? "— (no signal data)" :
      axis.level.toFixed(3) + (low ? " LOW: below" : " —") + " low-signal threshold " + lowLevel.toFixed(2) +
      (axis.levelMin !== null ? "; lowest " + axis.levelMin.toFixed(3) : "");
    view.level.setAttribute("data-low", String(low));
    view.alarms.textContent = "";
    if (axis.alarms.length === 0) view.alarms.appendChild(el("span", { "class": "muted" }, "none"));
    axis.alarms.forEach(function (name) { view.alarms.appendChild(el("b", {}, name)); });
    view.time.textContent = seconds(update.sampleTimeS) + " (sample " + axis.sampleIndex + ")";
    if (update.sampleTimeS !== null) {
      view.levels.push({ t: update.sampleTimeS, level: axis.level, min: axis.levelMin });
      while (view.levels.length > 0 && view.levels[0].t < update.sampleTimeS - LEVEL_SECONDS) view.levels.shift();
      drawLevels(view);
    }
    if (axis.trace && axis.trace.x.length > 0) {
      var peak = 1;
      for (var i = 0; i < axis.trace.x.length; i++) peak = Math.max(peak, Math.abs(axis.trace.x[i]), Math.abs(axis.trace.y[i]));
      var scale = niceScale(peak);
      if (scale !== view.rawScale) { view.rawScale = scale; view.rawScaleEl.textContent = "Scale ±" + group3(scale) + " counts."; view.raw.setAttribute("data-scale", String(scale)); }
      frame(view.raw, scale, "counts", 4); plot(view.raw, axis.trace.x, axis.trace.y, scale, "#0b6e99");
      frame(view.corr, 1.3, "", 0); plot(view.corr, axis.trace.u, axis.trace.v, 1.3, "#1a7f37");
    }
    axis.events.forEach(function (event) { logEvent(axis.name, event, update.time); });
    if (axis.eventsDropped > 0) logEvent(axis.name, { kind: "(more events)", state: "dropped", value: axis.eventsDropped, unit: "events", sampleIndex: axis.sampleIndex }, update.time);
  }

  function valueText(event) {
    if (event.value === null) return "—";
    switch (event.unit) {
      case "level": return event.value.toFixed(3) + " (level; 1 = calibrated)";
      case "rad/sample": return event.value.toFixed(3) + " rad/sample (" + (event.value / (2 * Math.PI)).toFixed(3) + " fringe/sample)";
      case "rad": return event.value.toFixed(3) + " rad (" + (event.value / (2 * Math.PI)).toFixed(3) + " fringe)";
      case "samples": return group3(event.value) + " samples lost";
      case "input units": return group3(event.value) + " ADC counts";
      case "relative radius": return (event.value * 100).toFixed(2) + " % of the calibrated radius" + (event.cause === "radius-scatter" ? " (RMS scatter)" : " (mean change)");
      default: return String(event.value) + (event.unit ? " " + event.unit : "");
    }
  }

  // A raise/clear flood of one alarm on one axis becomes one row whose counts grow, while its changes keep coming
  // within COLLAPSE_MS of each other; other alarms get rows of their own.
  function logEvent(axisName, event, time) {
    var now = Date.parse(time), key = axisName + " " + event.kind, groupFound = null;
    for (var i = 0; i < groups.length; i++) if (groups[i].key === key && now - groups[i].lastMs <= COLLAPSE_MS) { groupFound = groups[i]; break; }
    if (groupFound === null) {
      var tr = el("tr", { "class": "event" });
      groupFound = { key: key, row: tr, raised: 0, cleared: 0, lastMs: now, cells: {} };
      [["time", "last change (UTC)"], ["t", "sample time t"], ["axis", "axis"], ["kind", "alarm"], ["state", "state"], ["value", "value"], ["count", "raised / cleared"]].forEach(function (column) {
        var td = el("td", { "class": "log-" + column[0], "data-label": column[1] }); tr.appendChild(td); groupFound.cells[column[0]] = td;
      });
      groupFound.cells.axis.textContent = axisName; groupFound.cells.kind.textContent = event.kind;
      groups.unshift(groupFound);
      if (groups.length > LOG_ROWS) { var old = groups.pop(); logEl.removeChild(old.row); }
    } else {
      groups.splice(groups.indexOf(groupFound), 1); groups.unshift(groupFound);
    }
    logEl.insertBefore(groupFound.row, logEl.firstChild);
    if (event.state === "raised") groupFound.raised++; else if (event.state === "cleared") groupFound.cleared++;
    groupFound.lastMs = now;
    var c = groupFound.cells;
    c.time.textContent = isoTime(time);
    c.t.textContent = rateHz === null ? "—" : seconds(event.sampleIndex / rateHz);
    c.state.textContent = event.state; c.state.className = "log-state " + event.state;
    c.value.textContent = valueText(event);
    c.count.textContent = event.state === "dropped" ? "" : "×" + groupFound.raised + " / ×" + groupFound.cleared;
    groupFound.row.setAttribute("data-raised", String(groupFound.raised));
    groupFound.row.setAttribute("data-cleared", String(groupFound.cleared));
  }

  function showState(status) {
    if (status.rateHz !== null) rateHz = status.rateHz;
    if (status.lowSignalLevel !== null && status.lowSignalLevel !== undefined) lowLevel = status.lowSignalLevel;
    if (status.state === "waiting") setLink("waiting", "waiting for the measurement to start");
    else if (status.state === "live") setLink("live", "live");
    else if (status.state === "ended") end("ended", "measurement ended", status.time);
    else if (status.state === "failed") end("failed", "measurement failed", status.time);
  }

  // The end of the measurement is final: the text stays and the page does not reconnect.
  function end(state, text, time) {
    if (finalState !== null) return;
    finalState = state;
    setLink(state, text + (time ? " (" + isoTime(time) + ")" : ""));
  }

  function connect() {
    var url = (location.protocol === "https:" ? "wss://" : "ws://") + location.host + "/feed" + (token ? "?token=" + encodeURIComponent(token) : "");
    var socket = new WebSocket(url);
    socket.onopen = function () {
      retryMs = 500;
      setLink("connecting", "connected");
      socket.send(JSON.stringify({ type: "subscribe", updateHz: UPDATE_HZ, trace: true }));
    };
    socket.onmessage = function (message) {
      var data = JSON.parse(message.data);
      if (data.type === "hello" || data.type === "status") showState(data);
      else if (data.type === "update") {
        if (finalState === null) setLink("live", "live");
        rateHz = data.rateHz;
        clockEl.textContent = "updated " + isoTime(data.time) + " · t = " + seconds(data.sampleTimeS) + " · " + group3(data.rateHz) + " samples/s · " + UPDATE_HZ + " updates/s";
        data.axes.forEach(function (axis) { render(axis, data); });
      } else if (data.type === "error") {
        if (data.code === "source-error") end("failed", "measurement failed: " + data.message);
        else setLink("down", "feed error: " + data.message);
      } else if (data.type === "end") end("ended", "measurement ended", new Date().toISOString());
    };
    socket.onclose = function (event) {
      if (finalState !== null) return;
      setLink("down", "disconnected (" + event.code + (event.reason ? ": " + event.reason : "") + "), retrying in " + (retryMs / 1000).toFixed(1) + " s");
      setTimeout(connect, retryMs);
      retryMs = Math.min(retryMs * 2, 10000);
    };
  }
  connect();
})();
</script>
</body>
</html>
`;
}
