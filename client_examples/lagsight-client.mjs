#!/usr/bin/env node
// Call the Lagsight service from Node.js 18+ with the built-in fetch (no dependencies).
//
//   node lagsight-client.mjs single demo_payloads/bakery_daily_residuals.json
//   node lagsight-client.mjs batch  demo_payloads/retail_weekly_batch_500.json
//
// As a module: import { diagnose, diagnoseBatch, LagsightError } from "./lagsight-client.mjs";
// Environment: LAGSIGHT_URL (default http://127.0.0.1:8000), LAGSIGHT_TIMEOUT in seconds (default 30),
// LAGSIGHT_TOKEN (bearer token, only where the deployment requires one).
// Exit codes: 0 answered, 2 the service refused the request (problem details printed), 3 no answer.
import { readFile } from "node:fs/promises";
import { pathToFileURL } from "node:url";

/** The service answered with an error; `problem` holds its problem details (RFC 9457). */
export class LagsightError extends Error {
  constructor(problem) {
    super(`${problem.status} ${problem.title}: ${problem.detail}`);
    this.problem = problem;
    this.status = problem.status;
  }
}

const settings = {
  baseUrl: (process.env.LAGSIGHT_URL || "http://127.0.0.1:8000").replace(/\/+$/, ""),
  timeoutMs: Number(process.env.LAGSIGHT_TIMEOUT || "30") * 1000,
  token: process.env.LAGSIGHT_TOKEN || "",
};

async function post(route, body, opts = {}) {
  const { baseUrl, timeoutMs, token } = { ...settings, ...opts };
  const headers = { "Content-Type": "application/json", Accept: "application/json" };
  if (token) headers.Authorization = `Bearer ${token}`;
  // fetch has no default timeout: abort the whole exchange after timeoutMs.
  const response = await fetch(baseUrl + route, {
    method: "POST", headers, body: JSON.stringify(body), signal: AbortSignal.timeout(timeoutMs),
  });
  const type = response.headers.get("content-type") || "";
  if (type.startsWith("application/problem+json")) throw new LagsightError(await response.json());
  if (!response.ok) {
    throw new LagsightError({ status: response.status, title: response.statusText, detail: (await response.text()).slice(0, 200) });
  }
  return response.json();
}

/** One series: values (null = missing) and options such as period, max_lag, model_df, confidence. */
export const diagnose = (values, options = {}, opts) => post("/v1/diagnostics", { values, ...options }, opts);
/** Many series: [{ id, values }], options shared (a series may override them). */
export const diagnoseBatch = (series, options = {}, opts) => post("/v1/diagnostics/batch", { series, ...options }, opts);

const word = (w) => (w === true ? "white noise" : w === false ? "not white noise" : "no judgement");
const lags = (list) => (list.length ? list.join(", ") : "none");

function printReport(r) {
  console.log(r.name ?? "(unnamed)");
  console.log(`verdict: ${word(r.verdict.white_noise)}`);
  console.log(`summary: ${r.verdict.summary}`);
  console.log(`outside the band (ACF): ${lags(r.acf.outside)}`);
  console.log(`outside the band (PACF): ${lags(r.pacf.outside)}`);
}

function printBatch(answer) {
  const lines = answer.results.map((r) => (r.error
    ? `${r.id}: error ${r.error.status}: ${r.error.detail}`
    : `${r.id}: ${word(r.verdict.white_noise)}; ACF outside: ${lags(r.acf.outside)}`));
  const s = answer.summary;
  lines.push(`summary: ${s.white_noise} white noise, ${s.not_white_noise} not white noise, ` +
    `${s.undetermined} undetermined, ${s.errors} ${s.errors === 1 ? "error" : "errors"}`);
  console.log(lines.join("\n"));
}

async function main(argv) {
  const [mode, path] = argv;
  if (argv.length !== 2 || !["single", "batch"].includes(mode)) {
    console.error("usage: node lagsight-client.mjs single|batch PAYLOAD.json");
    return 64;
  }
  const body = JSON.parse(await readFile(path, "utf8"));
  try {
    const answer = await post(mode === "batch" ? "/v1/diagnostics/batch" : "/v1/diagnostics", body);
    if (mode === "batch") printBatch(answer); else printReport(answer);
    return 0;
  } catch (err) {
    if (err instanceof LagsightError) {
      const p = err.problem;
      console.error(`error ${p.status} (${p.title}): ${p.detail}`);
      for (const e of p.errors || []) console.error(`  ${e.pointer}: ${e.detail}`);
      return 2;
    }
    if (err.name === "TimeoutError" || err.name === "AbortError") {
      console.error(`error: no answer from ${settings.baseUrl} within ${settings.timeoutMs / 1000} s`);
    } else {
      console.error(`error: could not reach ${settings.baseUrl}: ${err.cause?.code || err.message}`);
    }
    return 3;
  }
}

if (import.meta.url === pathToFileURL(process.argv[1]).href) {
  process.exitCode = await main(process.argv.slice(2));
}
