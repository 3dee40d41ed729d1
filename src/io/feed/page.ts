// The live page the feed server serves: quadrature (Lissajous) figures raw and corrected, signal level,
// position and velocity readouts and the alarm log. Everything inline; it talks only to its own origin.

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
  :root { --ink: #1d232a; --muted: #5d6873; --line: #c9d0d6; --panel: #ffffff; --page: #eef1f3;
          --raw: #0b6e99; --corr: #1a7f37; --warn: #b35900; --alarm: #b3261e; }
  * { box-sizing: border-box; }
  body { margin: 0; font: 14px/1.4 system-ui, sans-serif; color: var(--ink); background: var(--page); }
  header { display: flex; gap: 16px; align-items: baseline; padding: 10px 16px; background: var(--panel); border-bottom: 1px solid var(--line); }
  header h1 { font-size: 16px; margin: 0; }
  #link { font-weight: 600; }
  #link[data-state="live"] { color: var(--corr); }
  #link[data-state="open"] { color: var(--warn); }
  #link[data-state="down"] { color: var(--alarm); }
  .muted { color: var(--muted); }
  main { padding: 12px 16px; display: grid; gap: 12px; }
  .axis { background: var(--panel); border: 1px solid var(--line); border-radius: 4px; padding: 10px 12px; display: grid;
          grid-template-columns: auto auto 1fr; gap: 12px; align-items: start; }
  .axis h2 { grid-column: 1 / -1; margin: 0; font-size: 15px; }
  figure { margin: 0; }
  figcaption { font-size: 12px; color: var(--muted); text-align: center; }
  canvas { display: block; width: 240px; height: 240px; border: 1px solid var(--line); background: #fbfcfd; }
  dl { margin: 0; display: grid; grid-template-columns: max-content 1fr; gap: 4px 12px; }
  dt { color: var(--muted); }
  dd { margin: 0; font: 15px/1.4 ui-monospace, monospace; }
  dd.big { font-size: 22px; }
  .bar { position: relative; width: 100%; max-width: 260px; height: 14px; border: 1px solid var(--line); background: #f3f5f6; }
  .bar span { position: absolute; left: 0; top: 0; bottom: 0; background: var(--corr); }
  .bar i { position: absolute; top: -3px; bottom: -3px; width: 2px; background: var(--alarm); }
  .bar[data-low="true"] span { background: var(--alarm); }
  .alarms { font: 13px ui-monospace, monospace; }
  .alarms b { color: var(--alarm); font-weight: 600; margin-right: 6px; }
  section.log { background: var(--panel); border: 1px solid var(--line); border-radius: 4px; padding: 10px 12px; }
  section.log h2 { margin: 0 0 6px; font-size: 15px; }
  table { border-collapse: collapse; width: 100%; font: 13px ui-monospace, monospace; }
  th, td { text-align: left; padding: 2px 8px; border-bottom: 1px solid #e3e7ea; }
  th { font: 12px system-ui, sans-serif; color: var(--muted); }
  tr.raised td.state { color: var(--alarm); }
  tr.cleared td.state { color: var(--corr); }
</style>
</head>
<body>
<header>
  <h1>fringetally — live feed</h1>
  <span id="link" data-state="connecting">connecting…</span>
  <span class="muted" id="rate"></span>
  <span class="muted">read-only view</span>
</header>
<main id="axes"></main>
<main>
  <section class="log">
    <h2>Alarm log</h2>
    <table><thead><tr><th>time</th><th>axis</th><th>sample</th><th>alarm</th><th>state</th><th>value</th></tr></thead><tbody id="log"></tbody></table>
  </section>
</main>
<script nonce="${nonce}">
"use strict";
(function () {
  var LOW_LEVEL = 0.3, LOG_ROWS = 200, UPDATE_HZ = 20;
  var token = new URLSearchParams(location.search).get("token");
  var linkEl = document.getElementById("link"), rateEl = document.getElementById("rate");
  var axesEl = document.getElementById("axes"), logEl = document.getElementById("log");
  var views = {};
  var retryMs = 500;

  function el(tag, attrs, text) {
    var node = document.createElement(tag);
    for (var key in attrs) node.setAttribute(key, attrs[key]);
    if (text !== undefined) node.textContent = text;
    return node;
  }

  function makeAxis(name) {
    var box = el("section", { "class": "axis", id: "axis-" + name });
    box.appendChild(el("h2", {}, "Axis " + name));
    var raw = el("canvas", { width: 240, height: 240, "class": "raw" });
    var corr = el("canvas", { width: 240, height: 240, "class": "corrected" });
    var f1 = el("figure"); f1.appendChild(raw); f1.appendChild(el("figcaption", {}, "Quadrature, raw (ADC counts)"));
    var f2 = el("figure"); f2.appendChild(corr); f2.appendChild(el("figcaption", {}, "Quadrature, corrected (unit circle)"));
    var dl = el("dl");
    function row(label, cls) { dl.appendChild(el("dt", {}, label)); var dd = el("dd", { "class": cls }); dl.appendChild(dd); return dd; }
    var view = {
      raw: raw, corr: corr, rawScale: 1,
      position: row("Position", "big position"), range: row("Range since last update", "range"),
      velocity: row("Velocity", "velocity"), level: row("Signal level", "level"),
      alarms: row("Alarms", "alarms"), sample: row("Sample index", "sample")
    };
    var bar = el("div", { "class": "bar" }); bar.appendChild(el("span")); var mark = el("i"); mark.style.left = (LOW_LEVEL / 1.2 * 100) + "%"; bar.appendChild(mark);
    view.bar = bar; view.level.appendChild(el("span", { "class": "level-text" })); view.level.appendChild(bar);
    box.appendChild(f1); box.appendChild(f2); box.appendChild(dl);
    axesEl.appendChild(box);
    clear(raw, false); clear(corr, true);
    return view;
  }

  function clear(canvas, unitCircle) {
    var g = canvas.getContext("2d"), w = canvas.width, h = canvas.height;
    g.fillStyle = "#fbfcfd"; g.fillRect(0, 0, w, h);
    grid(canvas, unitCircle);
  }

  function grid(canvas, unitCircle) {
    var g = canvas.getContext("2d"), w = canvas.width, h = canvas.height;
    g.strokeStyle = "#d5dbe0"; g.lineWidth = 1;
    g.beginPath(); g.moveTo(w / 2, 0); g.lineTo(w / 2, h); g.moveTo(0, h / 2); g.lineTo(w, h / 2); g.stroke();
    if (unitCircle) { g.beginPath(); g.arc(w / 2, h / 2, w / 2 / 1.3, 0, 2 * Math.PI); g.stroke(); }
  }

  // Persistence like an oscilloscope in X-Y mode: old points fade, new ones are drawn on top.
  function plot(canvas, xs, ys, scale, colour, unitCircle) {
    var g = canvas.getContext("2d"), w = canvas.width, h = canvas.height;
    g.fillStyle = "rgba(251,252,253,0.18)"; g.fillRect(0, 0, w, h);
    grid(canvas, unitCircle);
    g.fillStyle = colour;
    for (var i = 0; i < xs.length; i++) {
      var px = w / 2 + (xs[i] / scale) * (w / 2), py = h / 2 - (ys[i] / scale) * (h / 2);
      g.fillRect(px - 1, py - 1, 2.5, 2.5);
    }
  }

  function fmt(value, digits, unit) { return value === null ? "—" : value.toFixed(digits) + " " + unit; }
  function um(m) { return m === null ? null : m * 1e6; }
  function mmS(ms) { return ms === null ? null : ms * 1e3; }

  function render(axis) {
    var view = views[axis.name] || (views[axis.name] = makeAxis(axis.name));
    view.position.textContent = fmt(um(axis.positionM), 3, "µm");
    view.position.setAttribute("data-position-m", String(axis.positionM));
    view.range.textContent = fmt(um(axis.positionMinM), 3, "") + "… " + fmt(um(axis.positionMaxM), 3, "µm");
    view.velocity.textContent = fmt(mmS(axis.velocityMS), 3, "mm/s");
    view.velocity.setAttribute("data-velocity-ms", String(axis.velocityMS));
    var level = axis.level === null ? 0 : axis.level;
    view.level.querySelector(".level-text").textContent = axis.level === null ? "—" : (level * 100).toFixed(0) + " %";
    view.bar.firstChild.style.width = Math.min(100, Math.max(0, level / 1.2 * 100)) + "%";
    view.bar.setAttribute("data-low", String(level < LOW_LEVEL));
    view.alarms.textContent = "";
    if (axis.alarms.length === 0) view.alarms.appendChild(el("span", { "class": "muted" }, "none"));
    axis.alarms.forEach(function (name) { view.alarms.appendChild(el("b", {}, name)); });
    view.sample.textContent = String(axis.sampleIndex);
    if (axis.trace && axis.trace.x.length > 0) {
      var peak = 1;
      for (var i = 0; i < axis.trace.x.length; i++) peak = Math.max(peak, Math.abs(axis.trace.x[i]), Math.abs(axis.trace.y[i]));
      view.rawScale = Math.max(view.rawScale * 0.995, peak * 1.1);
      plot(view.raw, axis.trace.x, axis.trace.y, view.rawScale, "#0b6e99", false);
      plot(view.corr, axis.trace.u, axis.trace.v, 1.3, "#1a7f37", true);
    }
    axis.events.forEach(function (event) { logEvent(axis.name, event); });
  }

  function logEvent(axisName, event) {
    var tr = el("tr", { "class": event.state });
    [new Date().toLocaleTimeString(), axisName, String(event.sampleIndex), event.kind, event.state,
     event.value === null ? "" : String(Number(event.value.toPrecision(4)))].forEach(function (text, i) {
      tr.appendChild(el("td", i === 4 ? { "class": "state" } : {}, text));
    });
    logEl.insertBefore(tr, logEl.firstChild);
    while (logEl.childNodes.length > LOG_ROWS) logEl.removeChild(logEl.lastChild);
  }

  function connect() {
    var scheme = location.protocol === "https:" ? "wss:" : "ws:";
    var socket = new WebSocket(scheme + "//" + location.host + "/feed" + (token ? "?token=" + encodeURIComponent(token) : ""));
    socket.onopen = function () {
      retryMs = 500;
      linkEl.textContent = "connected, waiting for data"; linkEl.setAttribute("data-state", "open");
      socket.send(JSON.stringify({ type: "subscribe", updateHz: UPDATE_HZ, trace: true }));
    };
    socket.onmessage = function (message) {
      var data = JSON.parse(message.data);
      if (data.type === "update") {
        linkEl.textContent = "live"; linkEl.setAttribute("data-state", "live");
        rateEl.textContent = "update " + data.seq + " · " + UPDATE_HZ + " Hz";
        data.axes.forEach(render);
      } else if (data.type === "error") {
        linkEl.textContent = "feed error: " + data.message; linkEl.setAttribute("data-state", "down");
      } else if (data.type === "end") {
        linkEl.textContent = "measurement ended"; linkEl.setAttribute("data-state", "down");
      }
    };
    socket.onclose = function (event) {
      linkEl.setAttribute("data-state", "down");
      linkEl.textContent = "disconnected (" + event.code + "), retrying…";
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
