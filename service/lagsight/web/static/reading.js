/* Lagsight page: reading numbers and tables from pasted text or a dropped file.
 * The number rule is the service's (lagsight/inputs/numbers.py): the patterns below are the same strings,
 * and tests/test_numbers.py checks that they are and runs one table of cases through both readers. */
"use strict";

(function () {
  const MISSING = new Set(["", "na", "n/a", "nan", "null", "none", "#n/a", "-"]);
  const SPACE = " \t\r\n\u00a0\u202f";
  const SIGNS = "+-\u2212";
  const PATTERNS = {
    plain: {
      ".": String.raw`^(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?$`,
      ",": String.raw`^(?:[0-9]+(?:,[0-9]*)?|,[0-9]+)(?:[eE][+-]?[0-9]+)?$`,
    },
    grouped: {
      ".": String.raw`^[1-9][0-9]{0,2}([, \u00a0\u202f'\u2019])[0-9]{3}(?:\1[0-9]{3})*(?:\.[0-9]*)?$`,
      ",": String.raw`^[1-9][0-9]{0,2}([. \u00a0\u202f'\u2019])[0-9]{3}(?:\1[0-9]{3})*(?:,[0-9]*)?$`,
    },
  };
  const PLAIN = { ".": new RegExp(PATTERNS.plain["."]), ",": new RegExp(PATTERNS.plain[","]) };
  const GROUPED = { ".": new RegExp(PATTERNS.grouped["."]), ",": new RegExp(PATTERNS.grouped[","]) };
  const UNGROUP = /[,. \u00a0\u202f'\u2019]/g;
  const MARK_NAMES = { ".": "point", ",": "comma" };
  const ISO_DATE = /^\d{4}-\d{2}-\d{2}([T ][\d:.]+)?(Z|[+-]\d{2}:?\d{2})?$/;

  function strip(text) {
    let a = 0, b = text.length;
    while (a < b && SPACE.includes(text[a])) a++;
    while (b > a && SPACE.includes(text[b - 1])) b--;
    return text.slice(a, b);
  }

  const isMissing = (text) => MISSING.has(strip(text).toLowerCase());

  /** The number `text` stands for with decimal mark `mark` ("." or ","), null when missing; throws when not a number. */
  function readNumber(text, mark) {
    let s = strip(text);
    if (MISSING.has(s.toLowerCase())) return null;
    let sign = 1;
    if (s && SIGNS.includes(s[0])) {
      sign = s[0] === "+" ? 1 : -1;
      s = s.slice(1);
    }
    let digits;
    if (PLAIN[mark].test(s)) {
      digits = mark === "," ? s.replace(",", ".") : s;
    } else if (GROUPED[mark].test(s)) {
      const at = s.indexOf(mark);
      const whole = at < 0 ? s : s.slice(0, at), frac = at < 0 ? "" : s.slice(at + 1);
      digits = whole.replace(UNGROUP, "") + "." + frac;
    } else {
      throw new Error("is not a number");
    }
    const v = sign * Number(digits.endsWith(".") ? digits + "0" : digits);
    if (!Number.isFinite(v)) throw new Error("is too large");
    return v;
  }

  function reads(text, mark) {
    try { readNumber(text, mark); return true; } catch (err) { return false; }
  }

  /** Every cell with one mark: { values, mark, bad: [indexes], nBad }. */
  function readAll(cells, mark) {
    const out = { values: [], mark, bad: [], nBad: 0 };
    cells.forEach((cell, i) => {
      try {
        out.values.push(readNumber(cell, mark));
      } catch (err) {
        out.values.push(null);
        out.nBad += 1;
        if (out.bad.length < 10) out.bad.push(i);
      }
    });
    return out;
  }

  /** A column of cells, read as the service reads a CSV value column (numbers.read_column). */
  function readColumn(cells, mark) {
    const joined = cells.join("\n");
    if (mark || (!joined.includes(",") && !joined.includes("."))) return { ...readAll(cells, mark || "."), ambiguous: null };
    const point = readAll(cells, "."), comma = readAll(cells, ",");
    if (!point.nBad && !comma.nBad) {
      const i = point.values.findIndex((v, j) => v !== comma.values[j]);
      return { ...point, ambiguous: i < 0 ? null : i };
    }
    if (!point.nBad || !comma.nBad) return { ...(point.nBad ? comma : point), ambiguous: null };
    return { ...(comma.nBad < point.nBad ? comma : point), ambiguous: null };
  }

  // ------------------------------------------------------------------ pasted text

  /** The ways a paste can be split into values: one per line, or items between spaces, tabs and semicolons,
   * or (decimal point only) items between commas too. */
  function splitText(text) {
    const lines = text.replace(/\r\n?/g, "\n").split("\n");
    const filled = lines.map((l) => strip(l) !== "");
    const first = filled.indexOf(true), last = filled.lastIndexOf(true);
    const body = first < 0 ? [] : lines.slice(first, last + 1);
    const lineCells = body.map((l) => (strip(l) === "" ? "" : l));
    const itemsOf = (line, sep) => strip(line).split(sep).filter((t) => t !== "");
    const perLine = body.map((l) => itemsOf(l, /[ \t;]+/));
    const column = perLine.filter((p) => p.length).every((p) => p.length === 1);
    const flat = (parts) => parts.flatMap((p) => (p.length ? p : column ? [""] : []));
    const nonEmpty = perLine.filter((p) => p.length).length;
    const splits = { lines: lineCells, items: flat(perLine) };
    // commas separate values only in text without semicolons or tabs that is not a column of single items
    if (!/[;\t]/.test(text) && !(column && nonEmpty >= 2)) splits.list = flat(body.map((l) => itemsOf(l, /[ \t,]+/)));
    return splits;
  }

  const READINGS = [ // in this order: of readings that give the same numbers, the first names them
    { key: "items.", split: "items", mark: ".", label: "decimal point" },
    { key: "items,", split: "items", mark: ",", label: "decimal comma" },
    { key: "list.", split: "list", mark: ".", label: "commas between values" },
    { key: "lines.", split: "lines", mark: ".", label: "one value a line, decimal point" },
    { key: "lines,", split: "lines", mark: ",", label: "one value a line, decimal comma" },
  ];

  /** Every reading of `text` allowed by `mode` ("auto", "." or ","): { options: [distinct readings that work],
   * failed: the reading that got furthest when none works, with its first bad item }. */
  function readText(text, mode) {
    const splits = splitText(text);
    const options = [], failures = [];
    const seen = new Set();
    for (const r of READINGS) {
      if ((mode !== "auto" && r.mark !== mode) || !splits[r.split]) continue;
      const cells = splits[r.split];
      const done = readAll(cells, r.mark);
      if (done.nBad) {
        failures.push({ ...r, cells, ...done });
        continue;
      }
      const sig = JSON.stringify(done.values);
      if (seen.has(sig)) continue;
      seen.add(sig);
      options.push({ ...r, values: done.values });
    }
    failures.sort((a, b) => a.nBad - b.nBad);
    return { options, failed: options.length ? null : failures[0] || null };
  }

  // ------------------------------------------------------------------ tables

  function splitRows(text, delimiter) {
    const rows = [];
    let row = [], field = "", quoted = false;
    for (let i = 0; i < text.length; i++) {
      const ch = text[i];
      if (quoted) {
        if (ch === '"' && text[i + 1] === '"') { field += '"'; i++; }
        else if (ch === '"') quoted = false;
        else field += ch;
      } else if (ch === '"') quoted = true;
      else if (delimiter && ch === delimiter) { row.push(field); field = ""; }
      else if (ch === "\n") { row.push(field); rows.push(row); row = []; field = ""; }
      else field += ch;
    }
    if (field !== "" || row.length) { row.push(field); rows.push(row); }
    return rows.filter((r) => r.some((f) => strip(f) !== ""));
  }

  const isNumber = (cell) => !isMissing(cell) && (reads(cell, ".") || reads(cell, ","));

  /** Text read as a table ({ names, rows, delimiter, header }) when it is one: two or more lines and a header line,
   * or rows of equal width split by tabs or semicolons, or a first column of ISO 8601 dates; else null. */
  function readTable(text) {
    text = text.replace(/^\uFEFF/, "").replace(/\r\n?/g, "\n");
    const firstLine = text.split("\n").find((l) => strip(l) !== "") || "";
    const delimiter = ["\t", ";", ","].find((d) => firstLine.includes(d)) || null;
    const rows = splitRows(text, delimiter);
    if (rows.length < 2) return null;
    const width = rows[0].length;
    const header = rows[0].some((c) => !isNumber(c) && !isMissing(c) && !ISO_DATE.test(strip(c)));
    const even = width >= 2 && rows.every((r) => r.length === width);
    const dated = width >= 2 && ISO_DATE.test(strip(rows[0][0]));
    if (!header && !(even && (delimiter === "\t" || delimiter === ";")) && !dated) return null;
    const wide = Math.max(...rows.map((r) => r.length));
    const names = [];
    for (let j = 0; j < wide; j++) names.push(header && strip(rows[0][j] || "") ? strip(rows[0][j]) : `column ${j + 1}`);
    return { names, rows: header ? rows.slice(1) : rows, delimiter, header };
  }

  const cellsOf = (table, j) => table.rows.map((r) => (r[j] === undefined ? "" : r[j]));

  /** The time column (every filled cell an ISO 8601 date) and the value column (the first other column whose
   * every cell, over the whole table, is a number or missing, with at least one number). */
  function guessColumns(table) {
    const time = table.names.findIndex((_, j) => {
      const filled = cellsOf(table, j).map(strip).filter((c) => c !== "");
      return filled.length > 0 && filled.every((c) => ISO_DATE.test(c));
    });
    let value = -1, fewest = Infinity;
    table.names.forEach((_, j) => {
      if (j === time || value >= 0 && fewest === 0) return;
      const cells = cellsOf(table, j);
      const read = readColumn(cells, null);
      const numbers = read.values.filter((v) => v !== null).length;
      if (numbers && read.nBad < fewest) { value = j; fewest = read.nBad; }
    });
    if (value < 0) value = table.names.findIndex((_, j) => j !== time);
    return { time, value: value < 0 ? 0 : value };
  }

  window.LagsightReading = Object.freeze({
    PATTERNS, MARK_NAMES, readNumber, reads, readColumn, readText, readTable, guessColumns, cellsOf, strip,
  });
})();
