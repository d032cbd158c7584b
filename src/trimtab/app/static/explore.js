// trimtab explore: move a limit, re-solve, keep a trail of variants. No network beyond this server.
"use strict";
(function () {
  const settings = JSON.parse(document.getElementById("settings").textContent);
  const limits = settings.limits;
  const byKey = Object.fromEntries(limits.map((l) => [l.key, l]));
  const current = {};            // key -> value for every limit changed from the scenario
  const trail = [];              // {id, changes, status, figures, html, seconds, pinned}
  let shown = null;              // the variant on screen
  let inFlight = false, pending = false, slowTimer = null, typingTimer = null;

  // a variant with a portfolio: solved, or solved with rounded orders that breach a limit
  const NOT_FIT = "orders not fit to send";
  const hasBook = (v) => v.status === "solved" || v.status === NOT_FIT;
  const countText = (n, word) => `${n} ${word}${n === 1 ? "" : "s"}`;
  const breachedText = (v) => (v.breached || []).map((b) => b.name).join(", ");
  const $ = (id) => document.getElementById(id);
  const el = (tag, attrs, text) => {
    const node = document.createElement(tag);
    for (const [k, v] of Object.entries(attrs || {})) node.setAttribute(k, v);
    if (text !== undefined) node.textContent = text;
    return node;
  };
  const pct = (v, d = 2) => (v === null || v === undefined ? "–" : (100 * v).toFixed(d) + "%");
  const num = (v, d = 2) => (v === null || v === undefined ? "–" : Number(v).toFixed(d));
  const bp = (v) => (v === null || v === undefined ? "–" : (1e4 * v).toFixed(2) + " bp");
  const shownValue = (l, v) => (v === null || v === undefined ? "open" : l.unit === "fraction" ? pct(v, 2) : num(v, 3));
  const changeText = (changes) => {
    const keys = Object.keys(changes);
    if (!keys.length) return "scenario as written";
    return keys.map((k) => `${byKey[k] ? byKey[k].label : k} ${shownValue(byKey[k] || {}, changes[k])}`).join(", ");
  };

  // ------------------------------------------------------------------ controls
  function step(l) { return l.unit === "count" ? 1 : l.unit === "number" ? 0.1 : l.unit === "exposure" ? 0.01 : 0.0005; }

  function buildControls() {
    const list = $("limit-list");
    const sections = [...new Set(limits.map((l) => l.section))];
    for (const section of sections) {
      const box = el("details", { class: "section", "data-section": section });
      const own = limits.filter((l) => l.section === section && !l.optional).length;
      box.open = own > 0;  // a section of bounds the scenario does not set yet starts folded
      box.appendChild(el("summary", {}, own ? section : `${section}: add a bound`));
      for (const l of limits.filter((x) => x.section === section)) box.appendChild(control(l));
      list.appendChild(box);
    }
  }

  function control(l) {
    const row = el("div", { class: "limit" + (l.optional ? " optional" : ""), "data-key": l.key });
    const label = el("label", { for: "n-" + l.key, title: l.key }, l.label);
    const key = el("code", {}, l.key);
    const scale = l.unit === "fraction" ? 100 : 1;   // fractions are typed and shown in percent
    const numberInput = el("input", { type: "number", id: "n-" + l.key, step: String(step(l) * scale), "aria-label": l.label + (scale === 100 ? " (%)" : "") });
    const slider = el("input", { type: "range", id: "s-" + l.key, min: String(l.low), max: String(l.high), step: String(step(l)), "aria-label": l.label + " slider" });
    const unit = el("span", { class: "unit" }, scale === 100 ? "%" : "");
    const reset = el("button", { type: "button", class: "reset", title: l.optional ? "remove this bound" : "back to the scenario's value" }, l.optional ? "×" : "↺");
    const set = (value) => {
      if (value === null) { numberInput.value = ""; slider.value = String((l.low + l.high) / 2); }
      else { numberInput.value = String(+(value * scale).toPrecision(10)); slider.value = String(value); }
    };
    set(l.value);
    row._set = set;
    slider.addEventListener("input", () => { const v = Number(slider.value); numberInput.value = String(+(v * scale).toPrecision(10)); changeLimit(l, v, 120); });
    numberInput.addEventListener("change", () => {
      if (numberInput.value.trim() === "") { if (l.optional) changeLimit(l, null, 0); else set(valueOf(l)); return; }
      const v = Number(numberInput.value) / scale;
      if (!Number.isFinite(v)) { set(valueOf(l)); return; }
      slider.value = String(v);
      changeLimit(l, v, 0);
    });
    reset.addEventListener("click", () => { set(l.value); changeLimit(l, l.value, 0); });
    const inputs = el("div", { class: "inputs" });
    inputs.append(numberInput, unit, slider, reset);
    row.append(label, key, inputs);
    return row;
  }

  function valueOf(l) { return Object.prototype.hasOwnProperty.call(current, l.key) ? current[l.key] : l.value; }

  function changeLimit(l, value, delay) {
    if (value === l.value) delete current[l.key]; else current[l.key] = value;
    markChanged();
    clearTimeout(typingTimer);
    typingTimer = setTimeout(requestSolve, delay);
  }

  function markChanged() {
    for (const row of document.querySelectorAll(".limit")) {
      row.classList.toggle("changed", Object.prototype.hasOwnProperty.call(current, row.dataset.key));
    }
  }

  function setControls(changes) {
    for (const key of Object.keys(current)) delete current[key];
    Object.assign(current, changes);
    for (const row of document.querySelectorAll(".limit")) {
      const l = byKey[row.dataset.key];
      row._set(valueOf(l));
    }
    markChanged();
  }

  // ------------------------------------------------------------------ solving
  async function requestSolve() {
    if (inFlight) { pending = true; return; }
    inFlight = true;
    const changes = { ...current };
    clearTimeout(slowTimer);
    slowTimer = setTimeout(() => { $("solving").hidden = false; document.body.classList.add("busy"); }, 150);
    const started = performance.now();
    try {
      const response = await fetch("/page/solve", {
        method: "POST", headers: { "Content-Type": "application/json" }, body: JSON.stringify({ limits: changes }),
      });
      const body = await response.json();
      if (!response.ok) { showError(body.detail || response.statusText); }
      else { body.seconds.round_trip = (performance.now() - started) / 1000; addVariant(changes, body); }
    } catch (err) {
      showError("the explore server did not answer (is it still running?)");
    } finally {
      clearTimeout(slowTimer);
      $("solving").hidden = true;
      document.body.classList.remove("busy");
      inFlight = false;
      if (pending) { pending = false; requestSolve(); }
    }
  }

  function showError(text) {
    $("status").textContent = "not solved";
    $("status").className = "bad";
    $("timing").textContent = text;
  }

  function addVariant(changes, view) {
    const variant = { id: trail.length + 1, changes, ...view, pinned: false };
    trail.push(variant);
    show(variant);
  }

  // ------------------------------------------------------------------ showing a variant
  function show(variant) {
    shown = variant;
    const solved = hasBook(variant);
    const notFit = variant.status === NOT_FIT;
    $("status").textContent = `Variant ${variant.id}: ${variant.status}` + (notFit ? ` (${countText((variant.breached || []).length, "limit")} breached on the rounded book)` : "");
    $("status").className = variant.status === "solved" ? "ok" : "bad";
    const s = variant.seconds || {};
    $("timing").textContent = `solve ${(1000 * (s.solve || 0)).toFixed(0)} ms · page ${(1000 * (s.render || 0)).toFixed(0)} ms` +
      (s.round_trip ? ` · round trip ${(1000 * s.round_trip).toFixed(0)} ms` : "");
    $("verdict").innerHTML = solved ? variant.html.verdict || "" : "";
    $("headline").innerHTML = solved ? variant.html.headline : "";
    $("unsolved").innerHTML = solved ? "" : variant.html.relaxation;
    $("warnings").innerHTML = solved ? variant.html.warnings || "" : "";
    $("stress").innerHTML = solved ? variant.html.stress || "" : "";
    $("stress-box").hidden = !(solved && variant.html.stress);
    $("overlay").innerHTML = solved ? variant.html.overlay || "" : "";
    $("overlay-box").hidden = !(solved && variant.html.overlay);
    for (const part of ["trades", "binding", "exposures"]) {
      $(part).innerHTML = solved ? variant.html[part] : '<p class="note">No portfolio for these limits: see above.</p>';
    }
    suggestName(variant);
    keepTrail();
    drawTrail();
    drawChart();
    drawPinned();
  }

  function suggestName(variant) {
    const box = $("save-name");
    if (!box.value || box.dataset.suggested === box.value) {
      box.value = `${settings.scenario}_variant${variant.id}`.replace(/[^A-Za-z0-9_-]/g, "_");
      box.dataset.suggested = box.value;
    }
  }

  function returnTo(variant) { setControls(variant.changes); show(variant); }

  function drawTrail() {
    const table = el("table", { class: "trail" });
    const head = el("tr");
    for (const h of ["#", "Changes from the scenario", "Status", "Tracking error", "Alpha", "IR", "Turnover", "Cost", ""]) head.appendChild(el("th", {}, h));
    table.appendChild(el("thead")).appendChild(head);
    const body = el("tbody");
    for (const v of [...trail].reverse()) {
      const f = v.figures || {};
      const row = el("tr", { class: (v === shown ? "shown " : "") + (v.pinned ? "pinned" : ""), "data-variant": String(v.id) });
      const cells = [String(v.id), changeText(v.changes), v.status, pct(f.tracking_error), pct(f.alpha), num(f.information_ratio), pct(f.turnover, 1), bp(f.cost)];
      cells.forEach((text, i) => row.appendChild(el("td", { class: i >= 3 ? "num" : i === 2 && v.status !== "solved" ? "status-bad" : "" }, text)));
      if (v.status === NOT_FIT) row.cells[2].title = `breached on the rounded book: ${breachedText(v)}`;
      const actions = el("td");
      const pin = el("button", { type: "button", class: "pin" }, v.pinned ? "unpin" : "pin");
      pin.addEventListener("click", () => { v.pinned = !v.pinned; keepTrail(); drawTrail(); drawChart(); drawPinned(); });
      const back = el("button", { type: "button", class: "show" }, "show");
      back.addEventListener("click", () => returnTo(v));
      actions.append(pin, back);
      row.appendChild(actions);
      body.appendChild(row);
    }
    table.appendChild(body);
    $("trail").replaceChildren(table);
  }

  function drawPinned() {
    const pinned = trail.filter((v) => v.pinned);
    $("pinned-box").hidden = pinned.length === 0;
    if (!pinned.length) return;
    const keys = [...new Set(pinned.flatMap((v) => Object.keys(v.changes)))];
    const table = el("table", { class: "pinned" });
    const head = el("tr");
    head.appendChild(el("th", {}, ""));
    for (const v of pinned) head.appendChild(el("th", { class: "num" }, `Variant ${v.id}`));
    table.appendChild(el("thead")).appendChild(head);
    const body = el("tbody");
    const addRow = (label, values, cls) => {
      const row = el("tr", { class: cls || "" });
      row.appendChild(el("th", { scope: "row" }, label));
      values.forEach((text) => row.appendChild(el("td", { class: "num" }, text)));
      body.appendChild(row);
    };
    for (const key of keys) {
      const l = byKey[key] || { unit: "number", label: key, value: null };
      addRow(l.label, pinned.map((v) => shownValue(l, Object.prototype.hasOwnProperty.call(v.changes, key) ? v.changes[key] : l.value)), "setting");
    }
    addRow("Status", pinned.map((v) => v.status));
    const fig = (name, fmt) => pinned.map((v) => (v.figures && v.figures[name] !== undefined ? fmt(v.figures[name]) : "–"));
    addRow("Expected alpha", fig("alpha", (x) => pct(x)));
    addRow("Tracking error", fig("tracking_error", (x) => pct(x)));
    addRow("Information ratio", fig("information_ratio", (x) => num(x)));
    addRow("Turnover", fig("turnover", (x) => pct(x, 1)));
    addRow("Estimated cost", fig("cost", bp));
    addRow("Names held", fig("names", (x) => num(x, 0)));
    table.appendChild(body);
    $("pinned").replaceChildren(table);
  }

  // ------------------------------------------------------------------ the trail across a refresh
  // Kept in this tab's sessionStorage under the scenario's trail key (its file's location and text):
  // nothing is sent to the server, and another or an edited scenario starts a fresh trail.
  const TRAIL_KEY = "trimtab-explore-trail:" + settings.trail_key;

  function keepTrail() {
    try {
      sessionStorage.setItem(TRAIL_KEY, JSON.stringify({ trail, shown: shown ? shown.id : null }));
      $("trail-note").textContent = "";
    } catch (err) {  // storage full or switched off: the trail still works until the page is left
      $("trail-note").textContent = "This browser would not keep the trail (storage full or off): a refresh will lose it.";
    }
  }

  function restoredTrail() {
    try {
      const kept = JSON.parse(sessionStorage.getItem(TRAIL_KEY) || "null");
      if (!kept || !Array.isArray(kept.trail) || !kept.trail.length) return null;
      const ok = kept.trail.every((v, i) => v && v.id === i + 1 && v.changes && typeof v.changes === "object" && v.html && typeof v.status === "string");
      return ok ? kept : null;
    } catch (err) {
      return null;  // unreadable: start a fresh trail
    }
  }

  function startTrail() {
    const kept = restoredTrail();
    if (kept === null) { addVariant({}, JSON.parse(document.getElementById("first").textContent)); return; }
    trail.push(...kept.trail.map((v) => ({ ...v, pinned: Boolean(v.pinned) })));
    returnTo(trail.find((v) => v.id === kept.shown) || trail[trail.length - 1]);
  }

  function clearTrail() {
    try { sessionStorage.removeItem(TRAIL_KEY); } catch (err) { /* nothing kept */ }
    window.location.reload();
  }

  // ------------------------------------------------------------------ the alpha-against-TE chart (inline SVG)
  const SVG = "http://www.w3.org/2000/svg";
  const svgEl = (tag, attrs, text) => {
    const node = document.createElementNS(SVG, tag);
    for (const [k, v] of Object.entries(attrs || {})) node.setAttribute(k, String(v));
    if (text !== undefined) node.textContent = text;
    return node;
  };

  function drawChart() {
    const points = trail.filter((v) => hasBook(v) && v.figures && v.figures.tracking_error !== null && v.figures.alpha !== null);
    const W = 640, H = 260, L = 64, R = 16, T = 12, B = 40;
    const svg = svgEl("svg", { viewBox: `0 0 ${W} ${H}`, role: "img", "aria-label": "expected alpha against tracking error of every solved variant" });
    if (!points.length) { $("chart").replaceChildren(svg); return; }
    const xs = points.map((v) => v.figures.tracking_error), ys = points.map((v) => v.figures.alpha);
    const pad = (lo, hi) => { const span = hi - lo || Math.abs(hi) || 0.01; return [lo - 0.1 * span, hi + 0.1 * span]; };
    const [x0, x1] = pad(Math.min(...xs), Math.max(...xs)), [y0, y1] = pad(Math.min(...ys), Math.max(...ys));
    const X = (x) => L + ((x - x0) / (x1 - x0)) * (W - L - R), Y = (y) => H - B - ((y - y0) / (y1 - y0)) * (H - T - B);
    svg.appendChild(svgEl("line", { x1: L, y1: H - B, x2: W - R, y2: H - B, class: "axis" }));
    svg.appendChild(svgEl("line", { x1: L, y1: T, x2: L, y2: H - B, class: "axis" }));
    // enough decimals that five ticks over a narrow span read as five different values
    const places = (lo, hi) => Math.min(4, Math.max(2, Math.ceil(-Math.log10((25 * (hi - lo)) || 1))));
    const dx = places(x0, x1), dy = places(y0, y1);
    for (let i = 0; i <= 4; i++) {
      const xv = x0 + (i / 4) * (x1 - x0), yv = y0 + (i / 4) * (y1 - y0);
      svg.appendChild(svgEl("text", { x: X(xv), y: H - B + 16, class: "tick", "text-anchor": "middle" }, pct(xv, dx)));
      svg.appendChild(svgEl("text", { x: L - 6, y: Y(yv) + 4, class: "tick", "text-anchor": "end" }, pct(yv, dy)));
    }
    svg.appendChild(svgEl("text", { x: (L + W - R) / 2, y: H - 4, class: "axis-label", "text-anchor": "middle" }, "tracking error (a year)"));
    svg.appendChild(svgEl("text", { x: 12, y: (T + H - B) / 2, class: "axis-label", "text-anchor": "middle", transform: `rotate(-90 12 ${(T + H - B) / 2})` }, "expected alpha"));
    for (const v of points) {
      const cls = "point" + (v.pinned ? " pinned" : "") + (v === shown ? " shown" : "") + (v.status === NOT_FIT ? " notfit" : "");
      const dot = svgEl("circle", { cx: X(v.figures.tracking_error), cy: Y(v.figures.alpha), r: v === shown ? 7 : 5, class: cls, "data-variant": v.id, tabindex: 0 });
      dot.appendChild(svgEl("title", {}, `Variant ${v.id}${v.status === NOT_FIT ? " (" + NOT_FIT + ")" : ""}: ${changeText(v.changes)}; TE ${pct(v.figures.tracking_error)}, alpha ${pct(v.figures.alpha)}`));
      dot.addEventListener("click", () => returnTo(v));
      svg.appendChild(dot);
      svg.appendChild(svgEl("text", { x: X(v.figures.tracking_error) + 8, y: Y(v.figures.alpha) - 6, class: "point-label" }, String(v.id)));
    }
    $("chart").replaceChildren(svg);
  }

  // ------------------------------------------------------------------ saving
  async function save() {
    const name = $("save-name").value.trim();
    const message = $("save-message");
    message.className = "";
    if (!shown) return;
    if (!hasBook(shown)) {
      message.textContent = `Variant ${shown.id} is ${shown.status}: choose a solved variant to save (click "show" in the trail).`;
      message.className = "bad";
      return;
    }
    const response = await fetch("/api/save", {
      method: "POST", headers: { "Content-Type": "application/json" }, body: JSON.stringify({ name, limits: shown.changes }),
    });
    const body = await response.json();
    if (response.ok && shown.status === NOT_FIT) {
      // saved as asked, but said plainly: its orders breach a limit once rounded to whole lots
      message.textContent = `Saved variant ${shown.id} as ${body.file}, but its ORDERS ARE NOT FIT TO SEND (breached on the rounded book: ${breachedText(shown)}): trimtab rebalance ${body.file} writes them as trades_not_fit_to_send.csv and exits with 6.`;
      message.className = "bad";
    } else if (response.ok) { message.textContent = `Saved variant ${shown.id} as ${body.file}. Run it with: trimtab rebalance ${body.file}`; message.className = "ok"; }
    else { message.textContent = body.detail || response.statusText; message.className = "bad"; }
  }

  buildControls();
  $("save-button").addEventListener("click", save);
  $("clear-trail").addEventListener("click", clearTrail);
  startTrail();
})();
