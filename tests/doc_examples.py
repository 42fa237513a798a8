"""The examples in the docs, run against a live server, with their shown outputs written from that run.

Each fenced block that a reader would run carries a marker, an HTML comment on the line before its fence
(a markdown viewer does not show it):

    <!-- example: NAME -->                     run the block (shell commands one by one, or a Python snippet)
    <!-- example: NAME; not run: REASON -->    a block that cannot run here, and why
    <!-- output: NAME; OPTIONS -->             the next block is NAME's output, written by this tool (which adds
                                               one after an example that has none)

Output options, separated by ";": ``show: PATHS`` keeps only those parts of a JSON answer (``verdict.summary``,
``advice[].code`` for one key of every item, ``tests[:2]`` for the first two items), with ``...`` where parts
were left out; ``round: D`` rounds its numbers to D decimals; ``head: N`` and ``tail: M`` keep the first N and
last M lines of each command's output. Without options a JSON answer is shown whole, laid out as the excerpts
are. A block of several commands shows a transcript (``$ command`` then its output).

    python -m tests.doc_examples           start a server, run every example, rewrite the output blocks
    python -m tests.doc_examples --check   the same, but only report the blocks that differ (exit 1)

tests/test_doc_examples.py runs the same code against the suite's live server and fails on any difference.
"""
from __future__ import annotations

import difflib
import json
import os
import re
import subprocess
import sys
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
#: The documents a new user reads; every docs/*.md is included as it is added.
DOCS = ("README.md", "client_examples/README.md", "demo_payloads/README.md",
        *sorted(str(p.relative_to(ROOT)) for p in (ROOT / "docs").glob("*.md")))
SHELL_LANGS = {"sh", "bash", "shell", "console"}
#: A block that reads like something to run or send: it must carry an example marker.
REQUEST_LANGS = SHELL_LANGS | {"python", "py", "js", "javascript", "powershell", "ps1", "http", "nginx", "html",
                               "java", "vb", "vba"}
REQUEST_TEXT = re.compile(r"\bcurl\b|/v1/|(localhost|127\.0\.0\.1):\d+|\blagsight\b"
                          r"|^\s*(python3?|node|java|pwsh|make)\s", re.MULTILINE | re.IGNORECASE)
DOCUMENTED_BASE = re.compile(r"\b(?:localhost|127\.0\.0\.1):8000\b")
MARKER = re.compile(r"^\s*<!--\s*(example|output):\s*(.*?)\s*-->\s*$")
FENCE = re.compile(r"^(\s*)```([\w+-]*)\s*$")
RUN_TIMEOUT = 180  # seconds one command may take
MORE = "..."


@dataclass
class Block:
    """A fenced block of a document: where it is, what it holds, and the marker before it."""

    doc: str
    open_line: int  # index of the opening fence line
    close_line: int  # index of the closing fence line
    indent: str
    lang: str
    text: str
    kind: str | None = None  # "example", "output" or None (no marker)
    name: str = ""
    options: dict[str, str] = field(default_factory=dict)

    @property
    def where(self) -> str:
        return f"{self.doc}:{self.open_line + 1}"

    def looks_like_a_request(self) -> bool:
        return self.lang in REQUEST_LANGS or bool(REQUEST_TEXT.search(self.text))


def blocks(doc: str, text: str | None = None) -> list[Block]:
    """Every fenced block of a document (or of text given for it) with the marker, if any, on the line before it."""
    lines = ((ROOT / doc).read_text() if text is None else text).splitlines()
    found, i = [], 0
    while i < len(lines):
        m = FENCE.match(lines[i])
        if not m:
            i += 1
            continue
        close = next(j for j in range(i + 1, len(lines)) if lines[j].strip() == "```")
        block = Block(doc, i, close, m.group(1), m.group(2), "\n".join(line[len(m.group(1)):]
                                                                       for line in lines[i + 1:close]))
        marker = MARKER.match(lines[i - 1]) if i else None
        if marker:
            body, _, reason = marker.group(2).partition("; not run:")  # a reason may hold ";" itself
            name, *opts = [part.strip() for part in body.split(";")]
            block.kind, block.name = marker.group(1), name
            block.options = {key.strip(): value.strip() for key, _, value in (o.partition(":") for o in opts)}
            if reason:
                block.options["not run"] = reason.strip()
        found.append(block)
        i = close + 1
    return found


def all_blocks() -> list[Block]:
    return [b for doc in DOCS for b in blocks(doc)]


def examples() -> list[Block]:
    return [b for b in all_blocks() if b.kind == "example"]


def not_run(block: Block) -> str | None:
    return block.options.get("not run")


# --- running ---------------------------------------------------------------------------------------------------

def commands(block: Block) -> list[str]:
    """The shell commands of a block, one per line (a line ending in a backslash goes on)."""
    joined = re.sub(r"\\\n\s*", "", block.text)
    return [line for line in joined.splitlines() if line.strip() and not line.lstrip().startswith("#")]


def _environment(base: str, bin_dir: str) -> dict[str, str]:
    """The caller's environment: `python` is this interpreter, lagsight importable, the clients pointed at base."""
    env = {k: v for k, v in os.environ.items() if not k.startswith("LAGSIGHT_")}
    env.update(PATH=bin_dir + os.pathsep + env.get("PATH", ""), LAGSIGHT_URL=base,
               PYTHONPATH=os.pathsep.join(filter(None, [str(ROOT / "service"), env.get("PYTHONPATH")])))
    return env


def run(block: Block, base: str) -> list[tuple[str, str]]:
    """Run one example against the server at base: (command, its standard output) for each command.

    The documented address (localhost:8000 or 127.0.0.1:8000) is replaced by the server's. A command that
    exits with a status other than 0 is an error (the docs show commands that work).
    """
    address = base.removeprefix("http://")
    with tempfile.TemporaryDirectory() as bin_dir:
        os.symlink(sys.executable, Path(bin_dir) / "python")
        env = _environment(base, bin_dir)
        if block.lang in SHELL_LANGS:
            steps = [(cmd, ["bash", "-c", DOCUMENTED_BASE.sub(address, cmd)], None) for cmd in commands(block)]
        elif block.lang == "python":
            steps = [("python", [sys.executable, "-"], DOCUMENTED_BASE.sub(address, block.text))]
        else:
            raise ValueError(f"{block.where}: no way to run a {block.lang or 'plain'} block; mark it not run")
        out = []
        for shown, argv, stdin in steps:
            done = subprocess.run(argv, check=False, input=stdin, capture_output=True, text=True, env=env, cwd=ROOT,
                                  timeout=RUN_TIMEOUT)
            if done.returncode != 0:
                raise RuntimeError(f"{block.where} ({block.name}): `{shown}` exited {done.returncode}:\n"
                                   f"{done.stderr[-2000:]}")
            out.append((shown, done.stdout))
    return out


# --- rendering -------------------------------------------------------------------------------------------------

def _selection(paths: str) -> dict:
    """'a.b, c[:2], d[].e' as a tree: key -> (list limit: None | 'all' | int, subtree or None for all of it)."""
    tree: dict = {}
    for path in filter(None, (p.strip() for p in paths.split(","))):
        node = tree
        steps = path.split(".")
        for i, step in enumerate(steps):
            m = re.fullmatch(r"(\w+)(\[(?::(\d+))?\])?", step)
            if not m:
                raise ValueError(f"cannot read the path {path!r}")
            limit = None if m.group(2) is None else int(m.group(3)) if m.group(3) else "all"
            last = i == len(steps) - 1
            _, sub = node.get(m.group(1), (limit, None if last else {}))
            if not last and sub is None:  # the whole of it is already shown
                break
            node[m.group(1)] = (limit, None if last else sub)
            node = sub
    return tree


def _project(value, tree: dict | None):
    if tree is None:
        return value
    out = {key: _limit(value[key], *tree[key]) for key in value if key in tree}
    missing = [key for key in tree if key not in value]
    if missing:
        raise KeyError(f"the answer has no {missing}")
    if len(out) < len(value):
        out[MORE] = MORE
    return out


def _limit(value, limit, sub):
    if limit is None:
        return _project(value, sub)
    items = [_project(item, sub) for item in (value if limit == "all" else value[:limit])]
    return items + ([MORE] if len(items) < len(value) else [])


def _rounded(value, digits: int):
    if isinstance(value, float):
        return round(value, digits)
    if isinstance(value, dict):
        return {k: _rounded(v, digits) for k, v in value.items()}
    if isinstance(value, list):
        return [_rounded(v, digits) for v in value]
    return value


def _one_line(value) -> str:
    if value == MORE:
        return MORE
    if isinstance(value, dict):
        items = (MORE if k == MORE else f"{json.dumps(k)}: {_one_line(v)}" for k, v in value.items())
        return "{" + ", ".join(items) + "}"
    if isinstance(value, list):
        return "[" + ", ".join(_one_line(v) for v in value) + "]"
    return json.dumps(value, ensure_ascii=False)


def _dump(value, indent: int = 0, width: int = 110) -> str:
    """JSON with two-space indents, flat objects and lists that fit on one line, MORE written as ``...``."""
    if not isinstance(value, (dict, list)):
        return _one_line(value)
    inside = list(value.values() if isinstance(value, dict) else value)
    line = _one_line(value)
    if not any(isinstance(v, (dict, list)) for v in inside) and indent + len(line) <= width:
        return line
    pad, inner = " " * indent, " " * (indent + 2)
    if isinstance(value, dict):
        items = [MORE if k == MORE else f"{json.dumps(k)}: {_dump(v, indent + 2, width)}" for k, v in value.items()]
        open_, close = "{", "}"
    else:
        items = [_dump(v, indent + 2, width) for v in value]
        open_, close = "[", "]"
    lines = [inner + item + ("," if i < len(items) - 1 and items[i + 1] != MORE else "")
             for i, item in enumerate(items)]
    return "\n".join([open_, *lines, pad + close])


def _cut(text: str, head: int | None, tail: int | None) -> list[str]:
    lines = text.rstrip("\n").splitlines()
    if head is None or len(lines) <= head + (tail or 0):
        return lines
    return lines[:head] + [MORE] + (lines[-tail:] if tail else [])


def render(results: list[tuple[str, str]], options: dict[str, str]) -> str:
    """The text of an output block for the results of one example."""
    head = int(options["head"]) if "head" in options else None
    tail = int(options["tail"]) if "tail" in options else None
    if "show" in options:
        (_, stdout), = results
        shown = _project(json.loads(stdout), _selection(options["show"]))
        return _dump(_rounded(shown, int(options["round"])) if "round" in options else shown)
    if len(results) == 1 and head is None and tail is None:
        try:  # a JSON answer shown whole, laid out as the excerpts are
            return _dump(json.loads(results[0][1]))
        except ValueError:
            pass
    if len(results) == 1:
        return "\n".join(_cut(results[0][1], head, tail))
    return "\n".join(line for cmd, stdout in results for line in [f"$ {cmd}", *_cut(stdout, head, tail)])


#: Values that change from run to run or release to release: not compared.
VOLATILE = [(re.compile(r'("(?:version|request_id)": )"[^"]*"'), r'\1"*"'),
            (re.compile(r'("(?:duration_ms|elapsed_ms)": )[\d.]+'), r"\1*"),
            (re.compile(r"\b[0-9a-f]{32}\b"), "*")]


def normalised(text: str) -> str:
    for pattern, replacement in VOLATILE:
        text = pattern.sub(replacement, text)
    return text


# --- the documents ---------------------------------------------------------------------------------------------

def output_blocks() -> dict[str, Block]:
    """Output blocks by the name of their example."""
    found: dict[str, Block] = {}
    for block in all_blocks():
        if block.kind == "output":
            assert block.name not in found, f"{block.where}: a second output block for {block.name}"
            found[block.name] = block
    return found


def run_all(base: str) -> dict[str, str]:
    """Every example that runs, run against base: name -> the text its output block should hold."""
    outputs = output_blocks()
    fresh = {}
    for block in examples():
        if not_run(block) is None:
            results = run(block, base)
            where = outputs[block.name] if block.name in outputs else block
            try:
                fresh[block.name] = render(results, where.options if where.kind == "output" else {})
            except (KeyError, ValueError) as error:  # a path the answer no longer has, an answer that is not JSON
                raise RuntimeError(f"{where.where} ({block.name}): {error}") from error
    return fresh


def differences(fresh: dict[str, str]) -> list[str]:
    """A unified diff for each output block whose text is not what the run gave (volatile values aside)."""
    out = []
    for name, block in output_blocks().items():
        if name in fresh and normalised(block.text) != normalised(fresh[name]):
            out.append("\n".join(difflib.unified_diff(block.text.splitlines(), fresh[name].splitlines(),
                                                      f"{block.where} ({name}) shown", "answered", lineterm="")))
    return out


def rewritten(doc: str, text: str, fresh: dict[str, str]) -> str:
    """A document's text with each output block named in fresh holding its new text (indented as the block is);
    an example that runs and has no output block yet gets one after it."""
    lines, found = text.splitlines(), blocks(doc, text)
    shown = {b.name for b in found if b.kind == "output"}
    for block in reversed([b for b in found if b.name in fresh and (b.kind == "output" or b.name not in shown)]):
        body = [block.indent + line if line else line for line in fresh[block.name].splitlines()]
        if block.kind == "output":
            lines[block.open_line + 1:block.close_line] = body
        else:
            lang = "json" if fresh[block.name].startswith("{") else "text"
            lines[block.close_line + 1:block.close_line + 1] = [
                "", f"{block.indent}<!-- output: {block.name} -->", f"{block.indent}```{lang}", *body,
                f"{block.indent}```"]
    return "\n".join(lines) + "\n"


def rewrite(fresh: dict[str, str]) -> list[str]:
    """Write each output block's new text into its document; returns the documents changed."""
    changed = []
    for doc in DOCS:
        text = (ROOT / doc).read_text()
        new = rewritten(doc, text, fresh)
        if new != text:
            (ROOT / doc).write_text(new)
            changed.append(doc)
    return changed


def main(argv: list[str]) -> int:
    from tests.live_server import gunicorn

    with tempfile.TemporaryDirectory() as tmp:
        env = {"PYTHONPATH": os.pathsep.join(filter(None, [str(ROOT / "service"), os.environ.get("PYTHONPATH")]))}
        with gunicorn(Path(tmp) / "gunicorn.log", workers=2, env=env) as base:
            fresh = run_all(base)
    if "--check" in argv:
        diffs = differences(fresh)
        print("\n\n".join(diffs) or f"{len(fresh)} examples run; every shown output is what the service answered")
        return 1 if diffs else 0
    changed = rewrite(fresh)
    print(f"{len(fresh)} examples run; documents rewritten: {', '.join(changed) or 'none'}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
