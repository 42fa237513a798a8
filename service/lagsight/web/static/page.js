/* Lagsight page: read a pasted series or a CSV file, call POST v1/diagnostics, show the result.
 * Plain JavaScript and inline SVG (charts.js); downloads and the follow-up routes in answer.js.
 * No libraries, no network other than this service (same origin). */
"use strict";

(function () {
  const API = "v1/diagnostics"; // relative, so the page also works behind a path prefix
  const TIMEOUT_MS = 60000;
  const $ = (id) => document.getElementById(id);
  const state = { pick: null, tableSignature: null, report: null, body: null, raw: null };
  const C = window.LagsightCharts;

  // ------------------------------------------------------------------ reading the input

  const R = window.LagsightReading;
  const PREVIEW = 5;

  function preview(values) {
    const shown = values.length <= PREVIEW + 1 ? values
      : values.slice(0, PREVIEW).concat(["…", values[values.length - 1]]);
    return shown.map((v) => (v === null ? "NA" : String(v))).join(", ");
  }

  const count = (n, one, many) => `${n} ${n === 1 ? one : many}`;

  function fillSelect(select, names, chosen, withNone) {
    select.replaceChildren();
    if (withNone) select.append(new Option("(none)", "-1"));
    names.forEach((n, j) => select.append(new Option(n, String(j))));
    select.value = String(chosen);
  }

  /** The readings of a table's value column allowed by the decimal mark chosen (one per distinct result). */
  function tableReadings(cells, mode) {
    const options = [], failures = [];
    for (const mark of mode === "auto" ? [".", ","] : [mode]) {
      const read = R.readColumn(cells, mark);
      const reading = { key: "cells" + mark, mark, label: `decimal ${R.MARK_NAMES[mark]}`, cells, ...read };
      if (read.nBad) failures.push(reading);
      else if (!options.some((o) => JSON.stringify(o.values) === JSON.stringify(read.values))) options.push(reading);
    }
    failures.sort((a, b) => a.nBad - b.nBad);
    return { options, failed: options.length ? null : failures[0] };
  }

  /** What the page reads from the text box now: { values, timestamps, what } or { ask: [readings] } or { error }. */
  function analyse() {
    const text = $("values").value;
    const mode = $("decimal").value;
    const table = R.readTable(text);
    let where = "", column = "", timestamps = null, found;
    if (table) {
      const signature = table.names.join("\u0000");
      if (state.tableSignature !== signature) { // a new table: guess its columns; the user may change them
        const guess = R.guessColumns(table);
        fillSelect($("csv-value-column"), table.names, guess.value, false);
        fillSelect($("csv-time-column"), table.names, guess.time, true);
        state.tableSignature = signature;
      }
      const vj = Number($("csv-value-column").value), tj = Number($("csv-time-column").value);
      found = tableReadings(R.cellsOf(table, vj), mode);
      column = ` in column "${table.names[vj]}"`;
      where = ` from "${table.names[vj]}"`;
      if (tj >= 0 && tj !== vj) {
        timestamps = R.cellsOf(table, tj).map(R.strip);
        where += `, timestamps from "${table.names[tj]}"`;
      }
    } else {
      state.tableSignature = null;
      found = R.readText(text, mode);
    }
    $("csv-columns").hidden = !table;
    const { options, failed } = found;
    if (!options.length) {
      if (!failed) return { values: [], timestamps: null, what: "0 values" };
      const i = failed.bad[0], cell = R.strip(failed.cells[i]).slice(0, 30);
      const other = failed.mark === "." ? "," : ".";
      const hint = mode !== "auto" && R.reads(failed.cells[i], other)
        ? `; it reads as a number with a decimal ${R.MARK_NAMES[other]}: choose "${R.MARK_NAMES[other]}" or "work it out" as the decimal mark`
        : mode !== "auto" ? ` with a decimal ${R.MARK_NAMES[failed.mark]}` : "";
      return { error: `Value ${i + 1}${column} ("${cell}") is not a number${hint}.` };
    }
    const picked = options.length === 1 ? options[0] : options.find((o) => o.key === state.pick);
    if (!picked) return { ask: options, where };
    const missing = picked.values.filter((v) => v === null).length;
    const marked = table ? picked.cells.some((c) => /[.,]/.test(c)) : /[.,]/.test(text);
    const what = count(picked.values.length, "value", "values") + (missing ? ` (${missing} missing)` : "") + where +
      (marked || options.length > 1 ? `, read with ${picked.label}` : "") +
      (picked.values.length ? `: ${preview(picked.values)}` : "");
    return { values: picked.values, timestamps, what };
  }

  /** Show what was read, or ask which reading was meant; returns the analysis. */
  function updateCount() {
    const a = analyse();
    const choice = $("reading-choice");
    choice.hidden = !a.ask;
    if (a.ask) {
      $("values-count").textContent = "These numbers can be read in more than one way: choose one.";
      const box = $("reading-options");
      box.replaceChildren();
      for (const o of a.ask) {
        const b = document.createElement("button");
        b.type = "button";
        b.className = "reading-option";
        b.dataset.key = o.key;
        b.textContent = `${count(o.values.length, "value", "values")}: ${preview(o.values)} (${o.label})`;
        b.addEventListener("click", () => { state.pick = o.key; updateCount(); $("values").focus(); });
        box.append(b);
      }
    } else {
      $("values-count").textContent = a.error || a.what;
    }
    return a;
  }

  async function loadFile(file) {
    hideProblem();
    try {
      const text = (await file.text()).replace(/^\uFEFF/, "");
      $("values").value = text;
      state.pick = null;
      const a = updateCount();
      const rows = text.split(/\r\n?|\n/).filter((l) => R.strip(l) !== "").length;
      $("csv-status").textContent = `Read ${file.name}: ${count(rows, "line", "lines")}` +
        (a.values ? `, ${count(a.values.length, "value", "values")}.` : ".");
    } catch (err) {
      showProblem({ title: `Could not read ${file.name}`, detail: err.message });
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
    const read = updateCount();
    if (read.error) throw new Error(read.error);
    if (read.ask) throw new Error("These numbers can be read in more than one way: choose one under Values first.");
    const values = read.values;
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
    if (read.timestamps) body.timestamps = read.timestamps;
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
      $("follow").hidden = true;
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
      const text = await r.text();
      const payload = type.includes("json") ? JSON.parse(text) : { title: `HTTP ${r.status}`, detail: text };
      if (!r.ok) {
        showProblem(payload);
        $("result").hidden = true;
        $("follow").hidden = true;
      } else {
        Object.assign(state, { report: payload, body, raw: text });
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
    if (report.model_df) facts.push(count(report.model_df, "fitted parameter", "fitted parameters"));
    if (report.n_missing) facts.push(`${report.n_missing} missing`);
    $("facts").textContent = facts.join(" · ");

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
    $("follow").hidden = false;
    window.LagsightAnswer.reset(state);
    drawCharts();
    section.focus();
  }

  /** Positions filled in by interpolation and left missing, from the values sent and the answer's ``missing``. */
  function seriesAsSent(body, report) {
    const y = body.values.slice();
    const present = y.map((v, i) => (v === null ? -1 : i)).filter((i) => i >= 0);
    const first = present[0], last = present[present.length - 1];
    const inside = y.map((v, i) => i).filter((i) => y[i] === null && i > first && i < last);
    const interpolate = report.missing && report.missing.method === "interpolate";
    const filled = interpolate ? inside : [];
    for (const i of filled) { // a straight line between the neighbours, as the service fills them
      let a = i - 1, b = i + 1;
      while (body.values[a] === null) a--;
      while (body.values[b] === null) b++;
      y[i] = body.values[a] + ((body.values[b] - body.values[a]) * (i - a)) / (b - a);
    }
    const missing = y.map((v, i) => (v === null ? i : -1)).filter((i) => i >= 0);
    return { y, filled, missing, stamps: body.timestamps || null };
  }

  /** Draw the three charts at the width they have now (again on a resize). */
  function drawCharts() {
    const report = state.report;
    if (!report || $("result").hidden) return;
    const series = seriesAsSent(state.body, report);
    const steps = (report.transform && report.transform.steps) || [];
    const gaps = (report.missing && report.missing.from_gaps) || 0;
    $("time-caption").textContent = "The series as sent" + (steps.length ? " (before the transforms)" : "") +
      (gaps ? `; ${count(gaps, "time slot", "time slots")} missing between the timestamps ${gaps === 1 ? "is" : "are"} not drawn` : "");
    C.timePlot($("time-chart"), series, "The series as sent");
    C.legend($("time-legend"), ["line"].concat(series.filled.length ? ["filled"] : [],
      series.missing.length ? ["missing"] : []));
    const seasonal = new Set(((report.seasonal && report.seasonal.lags) || []).map((e) => e.lag));
    C.correlogram($("acf-chart"), report.acf, seasonal, "Autocorrelation");
    C.correlogram($("pacf-chart"), report.pacf, seasonal, "Partial autocorrelation");
    const zones = new Set();
    for (const block of [report.acf, report.pacf]) {
      const far = new Set(block.far || block.outside), out = new Set(block.outside);
      block.lags.forEach((lag) => zones.add(!out.has(lag) ? "inside" : far.has(lag) ? "far" : "marginal"));
    }
    C.legend($("chart-legend"), ["band", ...["inside", "marginal", "far"].filter((z) => zones.has(z))]
      .concat(seasonal.size ? ["seasonal"] : []), `${+(report.confidence * 100).toFixed(1)}%`);
  }

  // ------------------------------------------------------------------ wiring

  function init() {
    $("series-form").addEventListener("submit", submit);
    $("values").addEventListener("input", updateCount);
    $("decimal").addEventListener("change", () => { state.pick = null; updateCount(); });
    $("csv-file").addEventListener("change", (e) => {
      if (e.target.files && e.target.files[0]) loadFile(e.target.files[0]);
    });
    $("csv-value-column").addEventListener("change", updateCount);
    $("csv-time-column").addEventListener("change", updateCount);
    let pending = 0;
    window.addEventListener("resize", () => {
      cancelAnimationFrame(pending);
      pending = requestAnimationFrame(drawCharts);
    });
    window.LagsightAnswer.init(state, { authHeaders, showProblem, hideProblem });
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
