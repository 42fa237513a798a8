/* Lagsight page: the charts, drawn as inline SVG in the style the images use.
 * Colours, shapes and legend words come from style.css (generated from lagsight/outputs/style.py) as
 * --ls-* custom properties: page.css colours the classes below with them, and this file reads the sizes
 * and words. Charts are drawn at the width of their box, so text keeps its size on a phone. */
"use strict";

(function () {
  const SVG = "http://www.w3.org/2000/svg";

  /** A --ls-* setting of the shared style (quotes taken off texts). */
  function setting(name) {
    const raw = getComputedStyle(document.documentElement).getPropertyValue(`--ls-${name}`).trim();
    return raw.replace(/^"(.*)"$/, "$1");
  }

  function el(name, attrs, parent) {
    const node = document.createElementNS(SVG, name);
    for (const [k, v] of Object.entries(attrs || {})) node.setAttribute(k, String(v));
    if (parent) parent.append(node);
    return node;
  }

  const fmt = (x, d = 3) => (x === null || x === undefined ? "n/a" : Number(x).toFixed(d));

  /** Keep the labels (SVG text, in drawing order along x) whose boxes do not touch an earlier kept one. */
  function thinLabels(labels, gap) {
    let right = -Infinity;
    for (const t of labels) {
      const box = t.getBBox();
      if (box.width > 0 && box.x < right + gap) t.remove();
      else right = box.x + box.width;
    }
  }

  /** A step of 1, 2 or 5 times a power of ten, giving at most ``most`` steps over ``span``. */
  function niceStep(span, most) {
    const raw = span / Math.max(1, most);
    const power = Math.pow(10, Math.floor(Math.log10(raw || 1)));
    for (const m of [1, 2, 5, 10]) if (m * power >= raw) return m * power;
    return 10 * power;
  }

  function frame(host, label, description, height) {
    const W = Math.max(260, Math.round(host.clientWidth || 560));
    const H = height(W);
    const svg = el("svg", { viewBox: `0 0 ${W} ${H}`, width: W, height: H, role: "img",
      "aria-labelledby": `${host.id}-t ${host.id}-d` });
    el("title", { id: `${host.id}-t` }, svg).textContent = label;
    el("desc", { id: `${host.id}-d` }, svg).textContent = description;
    return { svg, W, H };
  }

  /** One correlogram: the band as a shaded stepped region, one bar per lag, seasonal lags marked. */
  function correlogram(host, block, seasonal, label) {
    const K = block.lags.length;
    const nOut = block.outside.length;
    const { svg, W, H } = frame(host, `${label} for lags 1 to ${K}`,
      `${nOut} of ${K} ${K === 1 ? "lag" : "lags"} ${nOut === 1 ? "falls" : "fall"} outside the shaded band` +
      (nOut ? `: ${nOut === 1 ? "lag" : "lags"} ${block.outside.join(", ")}.` : "."), (w) => (w < 480 ? 220 : 260));
    const left = 44, right = 10, top = 12, bottom = 44;
    const vals = block.values.map((x) => (x === null ? 0 : x));
    const reach = Math.max(...vals.map(Math.abs), ...block.upper.map((x) => Math.abs(x || 0)), 0.1);
    const ymax = Math.min(1, Math.ceil(reach * 1.15 * 10) / 10);
    const step = (W - left - right) / K;
    const xs = (lag) => left + (lag - 0.5) * step;
    const ys = (y) => top + ((ymax - y) / (2 * ymax)) * (H - top - bottom);

    for (const y of [-ymax, -ymax / 2, 0, ymax / 2, ymax]) {
      el("line", { x1: left, x2: W - right, y1: ys(y), y2: ys(y), class: "grid" }, svg);
      el("text", { x: left - 6, y: ys(y) + 4, "text-anchor": "end", class: "tick" }, svg).textContent = y.toFixed(2);
    }
    const upper = [], lower = [];
    block.lags.forEach((lag, i) => {
      const a = xs(lag) - step / 2, b = xs(lag) + step / 2;
      upper.push(`${a},${ys(block.upper[i] || 0)}`, `${b},${ys(block.upper[i] || 0)}`);
      lower.unshift(`${b},${ys(block.lower[i] || 0)}`, `${a},${ys(block.lower[i] || 0)}`);
    });
    el("polygon", { points: upper.concat(lower).join(" "), class: "band" }, svg);
    el("line", { x1: left, x2: W - right, y1: ys(0), y2: ys(0), class: "zero" }, svg);
    el("line", { x1: left, x2: left, y1: top, y2: H - bottom, class: "axis" }, svg);

    const out = new Set(block.outside);
    const far = new Set(block.far || block.outside); // reports without the far/marginal split: all "far"
    const barW = Math.max(1.5, step * Number(setting("bar-width") || 0.62));
    const round = barW * Number(setting("bar-round") || 0);
    block.lags.forEach((lag, i) => {
      const v = vals[i];
      const zone = !out.has(lag) ? "inside" : far.has(lag) ? "far" : "marginal";
      const y0 = ys(Math.max(v, 0)), y1 = ys(Math.min(v, 0));
      const bar = el("rect", { x: xs(lag) - barW / 2, y: y0, width: barW, height: Math.max(1, y1 - y0),
        rx: Math.min(round, (y1 - y0) / 2), class: `bar ${zone}`, "data-lag": lag }, svg);
      el("title", {}, bar).textContent = `lag ${lag}: ${fmt(block.values[i])}` +
        (zone === "far" ? " (far outside the band)" : zone === "marginal" ? " (just outside the band)" : "");
      if (seasonal.has(lag)) diamond(svg, xs(lag), H - bottom + 10, 5, "mark seasonal");
    });
    const every = niceStep(K, Math.floor((W - left - right) / 34));
    const ticks = [];
    for (let lag = Math.max(1, every); lag <= K; lag += Math.max(1, every)) {
      const t = el("text", { x: xs(lag), y: H - 8, "text-anchor": "middle", class: "tick lag-tick" }, svg);
      t.textContent = String(lag);
      ticks.push(t);
    }
    el("text", { x: left - 6, y: H - 8, "text-anchor": "end", class: "tick" }, svg).textContent = "lag";
    host.replaceChildren(svg);
    thinLabels(ticks, 4);
  }

  function diamond(parent, cx, cy, r, cls) {
    return el("polygon", { points: `${cx},${cy - r} ${cx + r},${cy} ${cx},${cy + r} ${cx - r},${cy}`, class: cls }, parent);
  }

  /** Labels for ISO dates: as short as the span allows (times within a day, month-day within a year...). */
  function shortDates(stamps) {
    const parts = stamps.map((s) => /^(\d{4})-(\d{2})-(\d{2})(?:[T ](\d{2}):(\d{2}))?/.exec(s || ""));
    if (!parts.length || parts.some((p) => !p)) return stamps.map(String);
    const day = (p) => Date.UTC(+p[1], +p[2] - 1, +p[3]);
    const span = (day(parts[parts.length - 1]) - day(parts[0])) / 864e5;
    const timed = parts.some((p) => p[4] !== undefined && p[4] + p[5] !== "0000");
    return parts.map((p) => {
      const time = p[4] !== undefined ? `${p[4]}:${p[5]}` : "";
      if (timed && span < 1) return time;
      if (timed && span <= 4) return `${p[2]}-${p[3]} ${time}`;
      if (span > 3 * 365) return `${p[1]}-${p[2]}`;
      if (p[1] === parts[0][1] && parts[parts.length - 1][1] === p[1]) return `${p[2]}-${p[3]}`;
      return `${p[1]}-${p[2]}-${p[3]}`;
    });
  }

  function number(v, step) {
    const d = Math.max(0, Math.min(6, -Math.floor(Math.log10(step) + 1e-9)));
    return v.toFixed(d);
  }

  /**
   * The series as sent: a line broken at missing values, rings on values filled in by interpolation,
   * ticks under missing ones. series = { y, filled (positions), missing (positions), stamps (or null) }.
   */
  function timePlot(host, series, label) {
    const n = series.y.length;
    const { svg, W, H } = frame(host, label, `${n} values` +
      (series.filled.length ? `; ${series.filled.length} filled in, drawn as rings` : "") +
      (series.missing.length ? `; ${series.missing.length} missing, marked under the line` : "") + ".",
    (w) => (w < 480 ? 200 : 240));
    const observed = series.y.filter((v) => v !== null);
    let lo = Math.min(...observed), hi = Math.max(...observed);
    if (!(hi > lo)) { lo -= 1; hi += 1; }
    const ystep = niceStep(hi - lo, 4);
    const ymin = Math.floor(lo / ystep) * ystep, ymax = Math.ceil(hi / ystep) * ystep;
    const yLabels = [];
    for (let v = ymin; v <= ymax + ystep / 2; v += ystep) yLabels.push(number(v, ystep));
    const left = Math.max(36, 10 + 7 * Math.max(...yLabels.map((t) => t.length)));
    const right = 12, top = 12, bottom = 44;
    const xs = (i) => left + (n > 1 ? i / (n - 1) : 0.5) * (W - left - right);
    const ys = (v) => top + ((ymax - v) / (ymax - ymin)) * (H - top - bottom);
    yLabels.forEach((text, j) => {
      const v = ymin + j * ystep;
      el("line", { x1: left, x2: W - right, y1: ys(v), y2: ys(v), class: "grid" }, svg);
      el("text", { x: left - 6, y: ys(v) + 4, "text-anchor": "end", class: "tick" }, svg).textContent = text;
    });
    el("line", { x1: left, x2: left, y1: top, y2: H - bottom, class: "axis" }, svg);
    let d = "", pen = false;
    series.y.forEach((v, i) => {
      if (v === null) { pen = false; return; }
      d += `${pen ? "L" : "M"}${xs(i).toFixed(2)},${ys(v).toFixed(2)}`;
      pen = true;
    });
    el("path", { d, class: "series" }, svg);
    for (const i of series.missing) {
      el("line", { x1: xs(i), x2: xs(i), y1: H - bottom - 7, y2: H - bottom, class: "miss", "data-index": i }, svg);
    }
    for (const i of series.filled) {
      const ring = el("circle", { cx: xs(i), cy: ys(series.y[i]), r: 3.5, class: "ring", "data-index": i }, svg);
      el("title", {}, ring).textContent = `value ${i + 1}: filled in as ${series.y[i]}`;
    }
    const names = series.stamps ? shortDates(series.stamps) : null;
    const widest = names ? Math.max(...names.map((s) => s.length)) * 6.5 : 30;
    const most = Math.max(2, Math.floor((W - left - right) / (widest + 16)));
    const ticks = [];
    const at = names ? [...new Set(Array.from({ length: Math.min(most, n) }, (_, j) =>
      Math.round((j * (n - 1)) / Math.max(1, Math.min(most, n) - 1))))] : [];
    if (!names) {
      const every = Math.max(1, niceStep(n - 1, most));
      for (let i = 0; i < n; i += every) at.push(i);
    }
    for (const i of at) {
      const t = el("text", { x: xs(i), y: H - 24, "text-anchor": "middle", class: "tick time-tick" }, svg);
      t.textContent = names ? names[i] : String(i);
      ticks.push(t);
    }
    el("text", { x: (left + W - right) / 2, y: H - 6, "text-anchor": "middle", class: "tick axis-title" }, svg)
      .textContent = names ? "time" : "position";
    host.replaceChildren(svg);
    for (const t of ticks) { // keep the first and last labels inside the drawing
      const box = t.getBBox();
      if (box.x < 0) t.setAttribute("x", String(Number(t.getAttribute("x")) - box.x));
      if (box.x + box.width > W) t.setAttribute("x", String(Number(t.getAttribute("x")) - (box.x + box.width - W)));
    }
    thinLabels(ticks, 8);
  }

  /** A legend: one item per mark, a small drawing of the mark and the shared words. */
  function legend(list, keys, bandLevel) {
    list.replaceChildren();
    for (const key of keys) {
      const li = document.createElement("li");
      li.dataset.key = key;
      const swatch = el("svg", { width: 18, height: 14, viewBox: "0 0 18 14", "aria-hidden": "true", class: "swatch" }, li);
      if (key === "band") el("rect", { x: 0, y: 2, width: 18, height: 10, class: "band" }, swatch);
      else if (["inside", "far", "marginal"].includes(key)) {
        el("rect", { x: 5, y: 1, width: 8, height: 12, rx: 1.5, class: `bar ${key}` }, swatch);
      } else if (key === "seasonal") diamond(swatch, 9, 7, 5, "mark seasonal");
      else if (key === "line") el("path", { d: "M1,10 L6,4 L11,8 L17,3", class: "series" }, swatch);
      else if (key === "filled") el("circle", { cx: 9, cy: 7, r: 3.5, class: "ring" }, swatch);
      else if (key === "missing") el("line", { x1: 9, x2: 9, y1: 3, y2: 12, class: "miss" }, swatch);
      const words = setting(`label-${key}`);
      li.append(key === "band" && bandLevel ? `${bandLevel} ${words}` : words);
      list.append(li);
    }
  }

  window.LagsightCharts = Object.freeze({ correlogram, timePlot, legend, setting, shortDates });
})();
