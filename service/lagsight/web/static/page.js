/* Lagsight page: read a pasted series or a CSV file, call POST v1/diagnostics, draw the result.
 * Plain JavaScript and inline SVG; no libraries, no network other than this service (same origin). */
"use strict";

(function () {
  const API = "v1/diagnostics"; // relative, so the page also works behind a path prefix
  const TIMEOUT_MS = 60000;
  const SVG = "http://www.w3.org/2000/svg";
  const MISSING_WORDS = new Set(["", "na", "n/a", "nan", "null", "none", "-", "#n/a"]);

  const $ = (id) => document.getElementById(id);
  const state = { timestamps: null, csv: null };

  // ------------------------------------------------------------------ parsing

  /** Split pasted text into numbers (null = missing). Throws an Error naming the first bad item. */
  function parseValues(text, decimalComma) {
    const lines = text.replace(/\r\n?/g, "\n").split("\n");
    const out = [];
    const separators = decimalComma ? /[\s;]+/ : /[\s;,]+/;
    const oneColumn = lines.filter((l) => l.trim() !== "").every((l) => l.trim().split(separators).length === 1);
    for (const line of lines) {
      const trimmed = line.trim();
      if (trimmed === "") {
        if (oneColumn && out.length) out.push(null); // an empty line in a column is a missing value
        continue;
      }
      for (const token of trimmed.split(separators)) {
        if (token === "") continue;
        out.push(parseNumber(token, decimalComma, out.length));
      }
    }
    while (out.length && out[out.length - 1] === null) out.pop(); // trailing empty lines are not data
    return out;
  }

  function parseNumber(token, decimalComma, index) {
    const t = token.trim().replace(/^"(.*)"$/, "$1");
    if (MISSING_WORDS.has(t.toLowerCase())) return null;
    let normal = t;
    if (decimalComma) {
      // a point is taken only as a thousands separator (1.234,5); anything else would change the number silently
      if (t.includes(".") && !/^[+-]?\d{1,3}(\.\d{3})+(,\d*)?$/.test(t)) {
        throw new Error(`Value ${index + 1} ("${t.slice(0, 30)}") has a decimal point; choose "point" as the decimal mark.`);
      }
      normal = t.replace(/\./g, "").replace(",", ".");
    }
    if (!/^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$/.test(normal)) {
      throw new Error(`Value ${index + 1} ("${t.slice(0, 30)}") is not a number.`);
    }
    const v = Number(normal);
    if (!Number.isFinite(v)) throw new Error(`Value ${index + 1} ("${t.slice(0, 30)}") is too large.`);
    return v;
  }

  /** A small CSV reader: delimiter sniffed from the first line, double quotes honoured, BOM dropped. */
  function parseCsv(text) {
    text = text.replace(/^\uFEFF/, "").replace(/\r\n?/g, "\n");
    const first = text.split("\n", 1)[0];
    const counts = { ";": 0, "\t": 0, ",": 0 };
    for (const ch of first) if (ch in counts) counts[ch] += 1;
    let delimiter = ",";
    if (counts[";"] >= counts[","] && counts[";"] >= counts["\t"] && counts[";"] > 0) delimiter = ";";
    else if (counts["\t"] > counts[","]) delimiter = "\t";
    const rows = [];
    let row = [], field = "", quoted = false;
    for (let i = 0; i < text.length; i++) {
      const ch = text[i];
      if (quoted) {
        if (ch === '"' && text[i + 1] === '"') { field += '"'; i++; }
        else if (ch === '"') quoted = false;
        else field += ch;
      } else if (ch === '"') quoted = true;
      else if (ch === delimiter) { row.push(field); field = ""; }
      else if (ch === "\n") { row.push(field); rows.push(row); row = []; field = ""; }
      else field += ch;
    }
    if (field !== "" || row.length) { row.push(field); rows.push(row); }
    const data = rows.filter((r) => r.some((f) => f.trim() !== ""));
    if (!data.length) throw new Error("The file has no rows.");
    const looksNumeric = (f) => /^[+-]?[\d.,]+([eE][+-]?\d+)?$/.test(f.trim());
    const header = !data[0].some(looksNumeric);
    const width = Math.max(...data.map((r) => r.length));
    const names = [];
    for (let j = 0; j < width; j++) names.push(header && data[0][j] ? data[0][j].trim() : `column ${j + 1}`);
    const body = header ? data.slice(1) : data;
    const sample = body.slice(0, 50).map((r) => r.join(delimiter)).join("\n");
    const decimalComma = delimiter !== "," && /\d,\d/.test(sample) && !/\d\.\d/.test(sample);
    return { names, rows: body, delimiter, decimalComma };
  }

  function guessColumns(csv) {
    const isTime = (f) => /^\d{4}-\d{2}-\d{2}([T ][\d:.]+)?(Z|[+-]\d{2}:?\d{2})?$/.test((f || "").trim());
    let time = -1, value = -1;
    csv.names.forEach((_, j) => {
      const cells = csv.rows.slice(0, 20).map((r) => r[j]);
      if (time < 0 && cells.every(isTime)) time = j;
    });
    csv.names.forEach((_, j) => {
      if (value >= 0 || j === time) return;
      const cells = csv.rows.slice(0, 20).map((r) => (r[j] || "").trim()).filter((c) => c !== "");
      if (cells.length && cells.every((c) => /^[+-]?[\d.,]+([eE][+-]?\d+)?$/.test(c))) value = j;
    });
    return { time, value: value < 0 ? 0 : value };
  }

  function fillSelect(select, names, chosen, withNone) {
    select.replaceChildren();
    if (withNone) select.append(new Option("(none)", "-1"));
    names.forEach((n, j) => select.append(new Option(n, String(j))));
    select.value = String(chosen);
  }

  function useCsvColumns() {
    const csv = state.csv;
    const vj = Number($("csv-value-column").value);
    const tj = Number($("csv-time-column").value);
    const values = csv.rows.map((r, i) => (r[vj] === undefined ? null : parseNumber(r[vj], csv.decimalComma, i)));
    $("values").value = values.map((v) => (v === null ? "" : String(v))).join("\n");
    $("decimal").value = ".";
    state.timestamps = tj >= 0 ? csv.rows.map((r) => (r[tj] || "").trim()) : null;
    const what = `${values.length} rows; values from "${csv.names[vj]}"` +
      (tj >= 0 ? `, timestamps from "${csv.names[tj]}"` : "") +
      (csv.decimalComma ? ", read with decimal commas" : "") + ".";
    $("csv-status").textContent = what;
    updateCount();
  }

  async function loadFile(file) {
    hideProblem();
    try {
      const text = await file.text();
      const csv = parseCsv(text);
      state.csv = csv;
      const guess = guessColumns(csv);
      fillSelect($("csv-value-column"), csv.names, guess.value, false);
      fillSelect($("csv-time-column"), csv.names, guess.time, true);
      $("csv-columns").hidden = false;
      useCsvColumns();
    } catch (err) {
      showProblem({ title: `Could not read ${file.name}`, detail: err.message });
    }
  }

  function updateCount() {
    try {
      const v = parseValues($("values").value, $("decimal").value === ",");
      const missing = v.filter((x) => x === null).length;
      $("values-count").textContent = `${v.length} values` + (missing ? ` (${missing} missing)` : "");
    } catch (err) {
      $("values-count").textContent = err.message;
    }
  }

  // ------------------------------------------------------------------ request

  function intField(id, label) {
    const raw = $(id).value.trim();
    if (raw === "") return undefined;
    const v = Number(raw);
    if (!Number.isInteger(v)) throw new Error(`${label} must be a whole number.`);
    return v;
  }

  function buildRequest() {
    const values = parseValues($("values").value, $("decimal").value === ",");
    if (!values.length) throw new Error("Paste some numbers or choose a CSV file first.");
    const body = { values };
    const period = intField("period", "Seasonal period");
    const maxLag = intField("max-lag", "Highest lag");
    const modelDf = intField("model-df", "Fitted parameters");
    if (period !== undefined) body.period = period;
    if (maxLag !== undefined) body.max_lag = maxLag;
    if (modelDf !== undefined) body.model_df = modelDf;
    body.confidence = Number($("confidence").value);
    if ($("missing").value !== "refuse") body.missing = $("missing").value;
    if ($("band").value !== "white_noise") body.band = $("band").value;
    const transform = {};
    if ($("log").checked) transform.log = true;
    if ($("difference").value !== "0") transform.difference = Number($("difference").value);
    if ($("seasonal-difference").value !== "0") transform.seasonal_difference = Number($("seasonal-difference").value);
    if (Object.keys(transform).length) body.transform = transform;
    const name = $("series-name").value.trim();
    if (name) body.name = name;
    if (state.timestamps && state.timestamps.length === values.length) body.timestamps = state.timestamps;
    return body;
  }

  function authHeaders(headers) {
    const token = $("token").value.trim();
    if (token) headers.Authorization = `Bearer ${token}`;
    return headers;
  }

  async function submit(event) {
    event.preventDefault();
    hideProblem();
    let body;
    try {
      body = buildRequest();
    } catch (err) {
      showProblem({ title: "Check the input", detail: err.message });
      $("result").hidden = true; // an old result must not be read as the answer to this input
      return;
    }
    const controller = new AbortController();
    const timer = setTimeout(() => controller.abort(), TIMEOUT_MS);
    $("submit").disabled = true;
    $("busy").textContent = "Computing...";
    try {
      const r = await fetch(API, {
        method: "POST",
        headers: authHeaders({ "Content-Type": "application/json", Accept: "application/json" }),
        body: JSON.stringify(body),
        signal: controller.signal,
      });
      const type = r.headers.get("Content-Type") || "";
      const payload = type.includes("json") ? await r.json() : { title: `HTTP ${r.status}`, detail: await r.text() };
      if (!r.ok) {
        showProblem(payload);
        $("result").hidden = true;
      } else {
        render(payload);
      }
    } catch (err) {
      showProblem({
        title: "No answer from the service",
        detail: err.name === "AbortError" ? `No answer within ${TIMEOUT_MS / 1000} s.` : err.message,
      });
    } finally {
      clearTimeout(timer);
      $("submit").disabled = false;
      $("busy").textContent = "";
    }
  }

  // ------------------------------------------------------------------ problems

  function describePointer(pointer) {
    const m = /^\/values\/(\d+)$/.exec(pointer || "");
    if (m) return `value ${Number(m[1]) + 1}`;
    return pointer ? pointer.replace(/^\//, "").replace(/\//g, " > ").replace(/_/g, " ") : "the request";
  }

  function showProblem(problem) {
    const box = $("problem");
    box.replaceChildren();
    const strong = document.createElement("strong");
    strong.textContent = problem.title || "Something went wrong";
    box.append(strong);
    const errors = Array.isArray(problem.errors) ? problem.errors : [];
    const distinct = errors.length === 1 && errors[0].detail === problem.detail;
    if (problem.detail && !distinct) {
      const p = document.createElement("p");
      p.textContent = problem.detail;
      box.append(p);
    }
    if (errors.length) {
      const ul = document.createElement("ul");
      for (const e of errors.slice(0, 20)) {
        const li = document.createElement("li");
        li.textContent = `${describePointer(e.pointer)}: ${e.detail}`;
        ul.append(li);
      }
      box.append(ul);
    }
    box.hidden = false;
  }

  function hideProblem() {
    $("problem").hidden = true;
    $("problem").replaceChildren();
  }

  // ------------------------------------------------------------------ result

  const fmt = (x, d = 3) => (x === null || x === undefined ? "n/a" : Number(x).toFixed(d));
  const fmtP = (p) => (p === null || p === undefined ? "n/a" : p < 0.001 ? "< 0.001" : p.toFixed(3));

  function listInto(id, items, make) {
    const ul = $(id);
    ul.replaceChildren();
    for (const item of items) {
      const li = document.createElement("li");
      make(li, item);
      ul.append(li);
    }
  }

  function render(report) {
    const v = report.verdict || {};
    const box = $("verdict");
    box.className = "verdict " + (v.white_noise === true ? "yes" : v.white_noise === false ? "no" : "none");
    const word = document.createElement("span");
    word.className = "word";
    word.textContent = v.white_noise === true ? "Consistent with white noise"
      : v.white_noise === false ? "Not white noise" : "No judgement";
    const summary = document.createElement("span");
    summary.textContent = v.summary || "";
    box.replaceChildren(word, summary);

    const facts = [`n = ${report.n}`, `lags 1 to ${report.max_lag}`, `band level ${report.confidence * 100}%`];
    if (report.period) facts.push(`period ${report.period}` + (report.seasonal && report.seasonal.period_source === "timestamps" ? " (from timestamps)" : ""));
    if (report.model_df) facts.push(`${report.model_df} fitted parameters`);
    if (report.n_missing) facts.push(`${report.n_missing} missing`);
    $("facts").textContent = facts.join(" · ");

    const seasonal = new Set(((report.seasonal && report.seasonal.lags) || []).map((e) => e.lag));
    drawCorrelogram($("acf-chart"), report.acf, seasonal, "Autocorrelation");
    drawCorrelogram($("pacf-chart"), report.pacf, seasonal, "Partial autocorrelation");

    listInto("sentences", (report.interpretation || []).slice(1), (li, s) => { li.textContent = s; });
    listInto("advice", report.advice || [], (li, a) => {
      li.textContent = a.action;
      const why = document.createElement("span");
      why.className = "advice-reason";
      why.textContent = a.reason;
      li.append(why);
    });
    if (!(report.advice || []).length) listInto("advice", ["Nothing further is suggested by these numbers."], (li, s) => { li.textContent = s; });
    listInto("cautions", report.cautions || [], (li, s) => { li.textContent = s; });
    listInto("warnings", report.warnings || [], (li, w) => { li.textContent = w.message || String(w); });
    $("warnings-block").hidden = !(report.warnings || []).length;

    const tbody = $("tests-table").tBodies[0];
    tbody.replaceChildren();
    for (const t of report.tests || []) {
      const tr = tbody.insertRow();
      const blank = (x) => (x === null || x === undefined ? "" : x);
      const cells = [t.name.replace(/_/g, "-"), blank(t.lag), blank(t.df), fmt(t.statistic, 2), fmtP(t.p_value),
        t.reject === null ? (t.note ? "not computable" : "n/a") : t.reject ? "yes" : "no"];
      for (const c of cells) tr.insertCell().textContent = String(c);
    }
    const lagBody = $("lags-table").tBodies[0];
    lagBody.replaceChildren();
    const outside = new Set(report.acf.outside);
    report.acf.lags.forEach((lag, i) => {
      const tr = lagBody.insertRow();
      const band = `${fmt(report.acf.lower[i])} to ${fmt(report.acf.upper[i])}`;
      for (const c of [lag, fmt(report.acf.values[i]), fmt(report.pacf.values[i]), band, outside.has(lag) ? "yes" : "no"]) {
        tr.insertCell().textContent = String(c);
      }
    });

    const section = $("result");
    section.hidden = false;
    section.focus();
  }

  function el(name, attrs, parent) {
    const node = document.createElementNS(SVG, name);
    for (const [k, v] of Object.entries(attrs || {})) node.setAttribute(k, String(v));
    if (parent) parent.append(node);
    return node;
  }

  /** Draw one correlogram: the band as a shaded region, one spike per lag, seasonal lags marked. */
  function drawCorrelogram(host, block, seasonal, label) {
    const W = 560, H = 260, left = 44, right = 12, top = 12, bottom = 34;
    const K = block.lags.length;
    const vals = block.values.map((x) => (x === null ? 0 : x));
    const reach = Math.max(...vals.map(Math.abs), ...block.upper.map((x) => Math.abs(x || 0)), 0.1);
    const ymax = Math.min(1, Math.ceil(reach * 1.15 * 10) / 10);
    const xs = (lag) => left + ((lag - 0.5) / K) * (W - left - right);
    const ys = (y) => top + ((ymax - y) / (2 * ymax)) * (H - top - bottom);
    const step = (W - left - right) / K;
    const nOut = block.outside.length;
    const svg = el("svg", { viewBox: `0 0 ${W} ${H}`, role: "img", "aria-labelledby": `${host.id}-t ${host.id}-d` });
    el("title", { id: `${host.id}-t` }, svg).textContent = `${label} for lags 1 to ${K}`;
    el("desc", { id: `${host.id}-d` }, svg).textContent =
      `${nOut} of ${K} lags fall outside the shaded band` + (nOut ? `: lags ${block.outside.join(", ")}.` : ".");

    for (const y of [-ymax, -ymax / 2, 0, ymax / 2, ymax]) {
      el("line", { x1: left, x2: W - right, y1: ys(y), y2: ys(y), class: "grid" }, svg);
      el("text", { x: left - 6, y: ys(y) + 4, "text-anchor": "end", class: "tick" }, svg).textContent = y.toFixed(2);
    }
    // the band: a stepped region from lower to upper, half a lag either side of each lag
    const upper = [], lower = [];
    block.lags.forEach((lag, i) => {
      const a = xs(lag) - step / 2, b = xs(lag) + step / 2;
      upper.push(`${a},${ys(block.upper[i])}`, `${b},${ys(block.upper[i])}`);
      lower.unshift(`${b},${ys(block.lower[i])}`, `${a},${ys(block.lower[i])}`);
    });
    el("polygon", { points: upper.concat(lower).join(" "), class: "band" }, svg);
    el("line", { x1: left, x2: W - right, y1: ys(0), y2: ys(0), class: "zero" }, svg);
    el("line", { x1: left, x2: left, y1: top, y2: H - bottom, class: "axis" }, svg);

    const out = new Set(block.outside);
    const far = new Set(block.far || block.outside); // reports without the far/marginal split: all "far"
    const barW = Math.max(1.5, Math.min(10, step * 0.55));
    block.lags.forEach((lag, i) => {
      const v = vals[i];
      const y0 = ys(Math.max(v, 0)), y1 = ys(Math.min(v, 0));
      const bar = el("rect", {
        x: xs(lag) - barW / 2, y: y0, width: barW, height: Math.max(1, y1 - y0), rx: Math.min(2, barW / 3),
        class: "spike " + (!out.has(lag) ? "inside" : far.has(lag) ? "outside" : "outside marginal"), "data-lag": lag,
      }, svg);
      el("title", {}, bar).textContent = `lag ${lag}: ${fmt(block.values[i])}` +
        (!out.has(lag) ? "" : far.has(lag) ? " (far outside the band)" : " (just outside the band)");
      if (seasonal.has(lag)) {
        const cx = xs(lag), cy = H - bottom + 8;
        el("polygon", { points: `${cx},${cy - 5} ${cx + 5},${cy} ${cx},${cy + 5} ${cx - 5},${cy}`, class: "mark" }, svg);
      }
    });
    const every = Math.max(1, Math.ceil(K / 12));
    for (let lag = 1; lag <= K; lag++) {
      if (lag % every !== 0 && !(lag === 1 && every > 2)) continue;
      el("text", { x: xs(lag), y: H - 8, "text-anchor": "middle", class: "tick" }, svg).textContent = String(lag);
    }
    el("text", { x: left - 6, y: H - 8, "text-anchor": "end", class: "tick" }, svg).textContent = "lag";
    host.replaceChildren(svg);
  }

  // ------------------------------------------------------------------ wiring

  function init() {
    $("series-form").addEventListener("submit", submit);
    $("values").addEventListener("input", () => {
      if (state.timestamps) { // typed-over values no longer line up with the file's timestamps
        state.timestamps = null;
        $("csv-status").textContent += " The values were edited, so the timestamps are no longer sent.";
      }
      updateCount();
    });
    $("decimal").addEventListener("change", updateCount);
    $("csv-file").addEventListener("change", (e) => {
      if (e.target.files && e.target.files[0]) loadFile(e.target.files[0]);
    });
    $("csv-value-column").addEventListener("change", useCsvColumns);
    $("csv-time-column").addEventListener("change", useCsvColumns);
    const zone = $("drop-zone");
    zone.addEventListener("dragover", (e) => { e.preventDefault(); zone.classList.add("over"); });
    zone.addEventListener("dragleave", () => zone.classList.remove("over"));
    zone.addEventListener("drop", (e) => {
      e.preventDefault();
      zone.classList.remove("over");
      if (e.dataTransfer && e.dataTransfer.files[0]) loadFile(e.dataTransfer.files[0]);
    });
    updateCount();
  }

  if (document.readyState === "loading") document.addEventListener("DOMContentLoaded", init);
  else init();
})();
