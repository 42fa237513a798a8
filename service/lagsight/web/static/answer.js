/* Lagsight page: what to do with an answer. Download it (JSON as received; CSV, SVG and PNG asked of the
 * service with format=), copy the request as a curl command, and run the next steps on the same series:
 * POST v1/model-check (the suggested model), v1/driver-check (a pasted driver) and v1/stability (windows). */
"use strict";

(function () {
  const API = "v1/diagnostics";
  const TIMEOUT_MS = 60000;
  const $ = (id) => document.getElementById(id);
  let state = null, h = null;

  /** Fields of the diagnosis body each follow-up route takes (its request schema; see openapi.yaml). */
  const SERIES_FIELDS = ["values", "timestamps", "period", "name", "missing", "transform"];
  const ANALYSIS_FIELDS = ["max_lag", "confidence", "band"];

  function pick(body, keys) {
    const out = {};
    for (const k of keys) if (body[k] !== undefined) out[k] = body[k];
    return out;
  }

  async function post(path, body, accept) {
    const controller = new AbortController();
    const timer = setTimeout(() => controller.abort(), TIMEOUT_MS);
    try {
      const r = await fetch(path, {
        method: "POST", body: JSON.stringify(body), signal: controller.signal,
        headers: h.authHeaders({ "Content-Type": "application/json", Accept: accept }),
      });
      if (!r.ok) {
        const type = r.headers.get("Content-Type") || "";
        const text = await r.text();
        throw Object.assign(new Error(text), { problem: type.includes("json") ? JSON.parse(text)
          : { title: `HTTP ${r.status}`, detail: text } });
      }
      return r;
    } finally {
      clearTimeout(timer);
    }
  }

  function failed(err, status) {
    h.showProblem(err.problem || { title: "No answer from the service",
      detail: err.name === "AbortError" ? `No answer within ${TIMEOUT_MS / 1000} s.` : err.message });
    if (status) status.textContent = "";
  }

  function save(blob, name) {
    const url = URL.createObjectURL(blob);
    const a = document.createElement("a");
    a.href = url;
    a.download = name;
    document.body.append(a);
    a.click();
    a.remove();
    setTimeout(() => URL.revokeObjectURL(url), 30000);
  }

  // ------------------------------------------------------------------ downloads and curl

  const DOWNLOADS = {
    "download-json": { name: "lagsight-answer.json" },
    "download-csv": { name: "lagsight-correlogram.csv", query: "?format=csv", accept: "text/csv" },
    "download-svg": { name: "lagsight-charts.svg", query: "?format=svg&chart=panel", accept: "image/svg+xml" },
    "download-png": { name: "lagsight-charts.png", query: "?format=png&chart=panel", accept: "image/png" },
  };

  async function download(id) {
    const d = DOWNLOADS[id];
    const status = $("download-status");
    h.hideProblem();
    try {
      let blob;
      if (!d.query) blob = new Blob([state.raw], { type: "application/json" });
      else {
        status.textContent = `Asking the service for ${d.name}...`;
        blob = await (await post(API + d.query, state.body, d.accept)).blob();
      }
      save(blob, d.name);
      status.textContent = `Saved ${d.name}.`;
    } catch (err) {
      failed(err, status);
    }
  }

  const quote = (s) => `'${s.replace(/'/g, "'\\''")}'`;

  /** The request just answered, as a POSIX shell command (the token, if any, read from LAGSIGHT_TOKEN). */
  function curlCommand() {
    const url = new URL(API, window.location.href).href;
    const parts = [`curl -sS --max-time 60 -X POST ${quote(url)}`, "-H 'Content-Type: application/json'",
      "-H 'Accept: application/json'"];
    if ($("token").value.trim()) parts.push('-H "Authorization: Bearer $LAGSIGHT_TOKEN"');
    parts.push(`--data-binary ${quote(JSON.stringify(state.body))}`);
    return parts.join(" \\\n  ");
  }

  async function copyCurl() {
    const command = curlCommand();
    const box = $("curl-text");
    box.value = command;
    $("curl-box").hidden = false;
    const token = $("token").value.trim() ? " It reads the token from the variable LAGSIGHT_TOKEN." : "";
    try {
      await navigator.clipboard.writeText(command);
      $("download-status").textContent = "Copied the request as a curl command." + token;
    } catch (err) {
      box.focus();
      box.select();
      $("download-status").textContent = "The browser did not allow copying: the command is selected below." + token;
    }
  }

  // ------------------------------------------------------------------ next steps

  const fmt = (x, d = 3) => (x === null || x === undefined ? "n/a" : Number(x).toFixed(d));
  const fmtP = (p) => (p === null || p === undefined ? "n/a" : p < 0.001 ? "< 0.001" : p.toFixed(3));
  const judged = (w) => (w === true ? "white noise" : w === false ? "not white noise" : "no judgement");

  function add(parent, tag, text, cls) {
    const node = document.createElement(tag);
    if (text !== undefined) node.textContent = text;
    if (cls) node.className = cls;
    parent.append(node);
    return node;
  }

  function facts(parent, rows) {
    const dl = add(parent, "dl", undefined, "numbers");
    for (const [term, value] of rows) {
      add(dl, "dt", term);
      add(dl, "dd", value);
    }
  }

  async function run(button, out, work) {
    h.hideProblem();
    button.disabled = true;
    out.replaceChildren();
    add(out, "p", "Computing...", "help");
    try {
      out.replaceChildren();
      await work(out);
    } catch (err) {
      out.replaceChildren();
      failed(err);
    } finally {
      button.disabled = false;
    }
  }

  function checkModel() {
    return run($("model-run"), $("model-out"), async (out) => {
      const body = { ...pick(state.body, SERIES_FIELDS.concat(ANALYSIS_FIELDS)), order: "suggested" };
      const a = await (await post("v1/model-check", body, "application/json")).json();
      const c = a.comparison;
      add(out, "h4", `Fitted: ${a.model.label}`);
      add(out, "p", c.sentence, "reading");
      const spike = (s) => (s.largest_spike ? `lag ${s.largest_spike.lag}, r = ${fmt(s.largest_spike.value)}` : "n/a");
      const lb = (s) => (s.ljung_box ? `${fmtP(s.ljung_box.p_value)} (lag ${s.ljung_box.lag})` : "n/a");
      facts(out, [
        ["before", `${judged(c.before.white_noise)}; largest spike ${spike(c.before)}; Ljung-Box p ${lb(c.before)}`],
        ["residuals", `${judged(c.after.white_noise)}; largest spike ${spike(c.after)}; Ljung-Box p ${lb(c.after)}`],
        ["AICc", fmt(a.model.aicc, 1)],
        ["parameters", a.model.parameters.map((p) => `${p.term}${p.lag ? " " + p.lag : ""} ${fmt(p.estimate)}` +
          (p.standard_error === null ? "" : ` (se ${fmt(p.standard_error)})`)).join("; ")],
      ]);
      for (const note of a.model.notes || []) add(out, "p", note, "help");
    });
  }

  function readDriver() {
    const text = $("driver-values").value;
    const found = window.LagsightReading.readText(text, $("decimal").value);
    if (!found.options.length) {
      const f = found.failed;
      throw Object.assign(new Error(), { problem: { title: "Check the driver", detail: f
        ? `Driver value ${f.bad[0] + 1} ("${window.LagsightReading.strip(f.cells[f.bad[0]]).slice(0, 30)}") is not a number.`
        : "Paste the driver's values first." } });
    }
    if (found.options.length > 1) {
      throw Object.assign(new Error(), { problem: { title: "Check the driver", detail:
        "The driver's numbers can be read in more than one way: choose the decimal mark under Options." } });
    }
    return found.options[0].values;
  }

  function checkDriver() {
    return run($("driver-run"), $("driver-out"), async (out) => {
      const name = $("driver-name").value.trim() || "driver";
      const values = readDriver();
      const body = { ...pick(state.body, SERIES_FIELDS.concat(["confidence"])), drivers: [{ name, values }] };
      const a = await (await post("v1/driver-check", body, "application/json")).json();
      const d = a.drivers[0];
      for (const sentence of d.reading) add(out, "p", sentence, "reading");
      facts(out, [
        ["moves with the series", d.moves_with_series ? "yes" : "no"],
        ["lags that stand out", d.key_lags.length ? d.key_lags.join(", ") : "none"],
        ["Haugh's joint test", `p ${fmtP(d.haugh.p_value)} (${d.haugh.df} df)`],
        ["largest spike", `lag ${d.largest.lag}, r = ${fmt(d.largest.value)}`],
      ]);
      for (const advice of d.advice) add(out, "p", advice.action, "help");
    });
  }

  function checkStability() {
    return run($("stability-run"), $("stability-out"), async (out) => {
      const body = { ...pick(state.body, SERIES_FIELDS.concat(ANALYSIS_FIELDS, ["model_df"])) };
      body.window = Number($("window").value);
      if ($("step").value.trim() !== "") body.step = Number($("step").value);
      const a = await (await post("v1/stability", body, "application/json")).json();
      for (const sentence of a.reading) add(out, "p", sentence, "reading");
      const k = a.counts;
      const found = a.changes.found;
      facts(out, [
        ["windows", `${k.windows} windows of ${a.window} values, a new one every ${a.step}`],
        ["judged white noise", `${k.white_noise} of ${k.windows}`],
        ["changes", found === null ? `not read: ${a.changes.note}` : found.length ? found.map((c) =>
          `${c.kind} near ${c.time || "index " + c.index} (p = ${fmtP(c.p_value)})`).join("; ") : "none found"],
      ]);
      const svg = await (await post("v1/stability?format=svg", body, "image/svg+xml")).text();
      const img = add(out, "img", undefined, "stability-image");
      img.alt = "Lag-1 autocorrelation and variance of each window, with the changes found. " + a.reading.join(" ");
      img.src = "data:image/svg+xml;charset=utf-8," + encodeURIComponent(svg);
    });
  }

  // ------------------------------------------------------------------ wiring

  function reset() {
    for (const id of ["model-out", "driver-out", "stability-out"]) $(id).replaceChildren();
    $("download-status").textContent = "";
    $("curl-box").hidden = true;
    const n = state.body.values.length;
    $("window").value = String(Math.max(20, Math.min(n, Math.round(n / 5))));
    $("window").max = String(n);
  }

  function init(s, helpers) {
    state = s;
    h = helpers;
    for (const id of Object.keys(DOWNLOADS)) $(id).addEventListener("click", () => download(id));
    $("copy-curl").addEventListener("click", copyCurl);
    $("model-run").addEventListener("click", checkModel);
    $("driver-run").addEventListener("click", checkDriver);
    $("stability-run").addEventListener("click", checkStability);
  }

  window.LagsightAnswer = Object.freeze({ init, reset, curlCommand });
})();
