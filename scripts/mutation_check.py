"""Mutation check of the physics and statistics modules: does a plausible bug fail a test?

Each mutant changes one thing in one module (a numeric constant, an arithmetic or a
comparison operator, a unary minus), then the module's own test files run against
it (``-x``, first failure stops; the byte-for-byte demo regeneration test is
deselected, since a legitimate model change trips it as well and it cannot see a
bug shared by simulator and model). A mutant that no test fails "survives".

Two modes:

* ``--table``: the named mutations of the project's survey (issue 15): each must be
  killed by a value test. Prints the test that kills it.
* default (broad): an automatic sample over the modules. ``--max N`` mutants in
  all (spread over the modules, chosen at random with ``--seed``), ``--modules``
  to restrict. Prints each mutant's outcome and the test that killed it, the survival
  rate overall and per module, and each survivor; ``--json PATH`` writes the same to
  a file, and ``--replay PATH`` runs that file's survivors again (after adding a test).
  The sample is drawn from the current source, so the same seed gives the same
  mutants only while the modules' source is unchanged.

The survivors that remain, each with the reason no test can see it (an equivalent
mutation, or an effect below what any test can resolve), are listed in
``scripts/mutation_survivors.md``.

A module's test files are its own tests and every external-reference file that
exercises it (``TESTS`` below). ``--fast`` deselects the tests marked slow: quicker,
but a term checked only by a slow test then shows as a survivor.

Why a script of our own and not a mutation-testing package: it needs to work on a
copy of the tree (tests find ``../shared/data`` relative to the repository root, so
the copy sits beside it), to run a per-module test selection, and to mutate
constants multiplicatively (×1.001, the size of a typo that still looks plausible)
rather than replacing them by 0/1, which tests catch trivially. It is a plain
``ast`` walk over the source plus text splicing, so the mutant differs from the
original in one token.

Run from the repository root:
    python scripts/mutation_check.py --table
    python scripts/mutation_check.py --max 80 --seed 1 --fast --json mutants.json
    python scripts/mutation_check.py --replay mutants.json --fast
The copy is made in a temporary folder beside the repository and removed at the end.
"""

from __future__ import annotations

import argparse
import ast
import json
import os
import pathlib
import random
import shutil
import signal
import subprocess
import sys
import tempfile
import time

ROOT = pathlib.Path(__file__).resolve().parents[1]

#: Test files run for a mutant of each module (its own tests and the external references).
TESTS = {
    "atmosphere": ["test_atmosphere.py", "test_against_iers_conventions.py", "test_against_niell_1996.py",
                   "test_against_is_gps_200.py", "test_against_pyproj.py", "test_measure.py", "test_rinex_met.py"],
    "geodesy": ["test_geodesy.py", "test_against_pyproj.py", "test_against_iers_conventions.py",
                "test_against_astropy.py", "test_against_iers_phase_terms.py", "test_against_igs_antex.py"],
    "signals": ["test_signals.py", "test_against_is_gps_200.py", "test_measure.py",
                "test_against_iers_phase_terms.py", "test_against_igs_antex.py"],
    "orbits": ["test_orbits.py", "test_against_is_gps_200.py", "test_against_igs_products.py",
               "test_against_iers_phase_terms.py"],
    "measure": ["test_measure.py", "test_against_real_data.py", "test_against_simulation.py",
                "test_against_iers_phase_terms.py", "test_against_igs_coordinates.py"],
    "tracks": ["test_tracks.py", "test_against_cggtts_v2e.py", "test_against_simulation.py"],
    "commonview": ["test_commonview.py", "test_against_real_pair.py", "test_against_simulation.py",
                   "test_against_simulation_multignss.py"],
    "stability": ["test_stability.py", "test_against_nist_sp1065.py", "test_against_kasdin_walter.py"],
}

DESELECT = ["tests/test_demo.py::test_demo_regenerates_identically"]

#: The survey's mutations (issue 15, "Survived"): module, exact source text, replacement.
TABLE = [
    ("Earth-rotation rate ×1.001 in measure", "measure",
     "OMEGA_E = 7.2921151467e-5", "OMEGA_E = 7.2921151467e-5 * 1.001"),
    ("Saastamoinen latitude-term sign", "atmosphere",
     "(1.0 - 0.00266 * np.cos(2.0 * lat)", "(1.0 + 0.00266 * np.cos(2.0 * lat)"),
    ("Saastamoinen height coefficient ×10", "atmosphere",
     "- 0.00028 * h_km)", "- 0.0028 * h_km)"),
    ("Niell 45° hydrostatic c typo", "atmosphere",
     "63.721774e-3", "63.712774e-3"),
    ("TDEV CIs from the unmodified-variance EDF", "stability",
     'modified = kind in ("mdev", "tdev")', 'modified = kind in ("mdev",)'),
    ("no outlier rejection in bins of exactly 3 satellites", "commonview",
     "keep = (cnt[g] < 3) |", "keep = (cnt[g] < 4) |"),
    ("no outlier rejection in epochs of exactly 3 satellites (measure)", "measure",
     "few = n < 3", "few = n < 4"),
    ("budget AR(1) inflation inverted", "commonview",
     "se_ac = se_scatter * np.sqrt((1 + rho) / (1 - rho))", "se_ac = se_scatter * np.sqrt((1 - rho) / (1 + rho))"),
]

_BINOP = {ast.Add: "-", ast.Sub: "+", ast.Mult: "/", ast.Div: "*"}
_CMP = {ast.Lt: "<=", ast.LtE: "<", ast.Gt: ">=", ast.GtE: ">"}
_CMP_TEXT = {ast.Lt: "<", ast.LtE: "<=", ast.Gt: ">", ast.GtE: ">="}


def _docstring_nodes(tree):
    out = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            if node.body and isinstance(node.body[0], ast.Expr) and isinstance(node.body[0].value, ast.Constant):
                out.add(id(node.body[0].value))
    return out


def _offsets(src):
    """Character offset of the start of each line (1-based line numbers)."""
    starts = [0, 0]
    for line in src.splitlines(keepends=True):
        starts.append(starts[-1] + len(line))
    return starts


def candidate_mutations(src: str):
    """All one-token mutations of a module's source: (description, start, end, replacement)."""
    tree = ast.parse(src)
    docs = _docstring_nodes(tree)
    starts = _offsets(src)
    out = []

    def span(node):
        return starts[node.lineno] + node.col_offset, starts[node.end_lineno] + node.end_col_offset

    for node in ast.walk(tree):
        if isinstance(node, ast.Constant) and id(node) not in docs and not isinstance(node.value, bool):
            a, b = span(node)
            text = src[a:b]
            if isinstance(node.value, float) and node.value != 0.0:
                out.append((f"{text} -> ×1.001", a, b, f"({text} * 1.001)", node.lineno))
            elif isinstance(node.value, int) and not isinstance(node.value, bool):
                out.append((f"{text} -> {node.value + 1}", a, b, repr(node.value + 1), node.lineno))
        elif isinstance(node, ast.BinOp) and type(node.op) in _BINOP:
            # the operator sits between the two operands' spans
            la, lb = span(node.left)
            ra, rb = span(node.right)
            mid = src[lb:ra]
            sym = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/"}[type(node.op)]
            k = mid.find(sym)
            if k >= 0 and "\n" not in mid and mid.count(sym) == 1 and "**" not in mid and "//" not in mid:
                out.append((f"'{sym}' -> '{_BINOP[type(node.op)]}'", lb + k, lb + k + 1,
                            _BINOP[type(node.op)], node.lineno))
        elif isinstance(node, ast.Compare) and len(node.ops) == 1 and type(node.ops[0]) in _CMP:
            la, lb = span(node.left)
            ra, rb = span(node.comparators[0])
            mid = src[lb:ra]
            sym = _CMP_TEXT[type(node.ops[0])]
            k = mid.find(sym)
            if k >= 0 and "\n" not in mid:
                out.append((f"'{sym}' -> '{_CMP[type(node.ops[0])]}'", lb + k, lb + k + len(sym),
                            _CMP[type(node.ops[0])], node.lineno))
        elif isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub) and not isinstance(node.operand,
                                                                                                ast.Constant):
            a, b = span(node)
            if src[a] == "-":
                out.append(("unary '-' removed", a, a + 1, "", node.lineno))
    return out


def explained_survivors(path=None):
    """Rows of ``scripts/mutation_survivors.md``: (module, code on the line, mutations, class).

    A survivor is *explained* when its module and mutation text match a row and the row's
    code fragment is on the mutated line (so a row keeps matching when lines move)."""
    path = path or ROOT / "scripts" / "mutation_survivors.md"
    rows = []
    if not path.exists():
        return rows
    for line in path.read_text().splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) >= 5 and cells[0] in TESTS:
            code = cells[1].strip("`")
            muts = [m for m in cells[2].split("`")[1::2]]
            rows.append((cells[0], code, muts, cells[3]))
    return rows


def explain(rows, module, line_text, desc, column=None):
    """The class of the first matching row of :func:`explained_survivors`, or None. A mutation
    written ``1 -> 2@94`` in the table matches only the token at that column of the line (for a
    line where the same mutation text hits several tokens that are not all equivalent)."""
    for m, code, muts, klass in rows:
        if m != module or code not in line_text:
            continue
        for spec in muts:
            text, _, col = spec.partition("@")
            if text == desc and (not col or (column is not None and int(col) == column)):
                return klass
    return None


def make_copy() -> pathlib.Path:
    """Copy the tree beside the repository (so ``../shared/data`` still resolves)."""
    tmp = pathlib.Path(tempfile.mkdtemp(prefix=".ctt-mutation-", dir=ROOT.parent))
    for name in ("ctt", "tests", "data_demo", "scripts"):
        shutil.copytree(ROOT / name, tmp / name, ignore=shutil.ignore_patterns("__pycache__", "*.pyc"))
    for name in ("pyproject.toml", "README.md", "DEVELOPERS.md"):
        if (ROOT / name).exists():
            shutil.copy2(ROOT / name, tmp / name)
    return tmp


def run_tests(copy: pathlib.Path, module: str, timeout: float, extra=()):
    files = [f"tests/{f}" for f in TESTS[module] if (copy / "tests" / f).exists()]
    cmd = [sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider", "-p", "no:randomly",
           "--no-header", "-o", "addopts=", *[f"--deselect={d}" for d in DESELECT], *extra, *files]
    env = {**os.environ, "PYTHONPATH": str(copy), "PYTHONDONTWRITEBYTECODE": "1"}
    t0 = time.perf_counter()
    try:
        p = subprocess.run(cmd, cwd=copy, env=env, capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        return "timeout", time.perf_counter() - t0, ""
    dt = time.perf_counter() - t0
    failed = [ln.split(" ", 1)[1].split(" - ")[0] for ln in p.stdout.splitlines() if ln.startswith(("FAILED", "ERROR"))]
    if p.returncode == 0:
        return "survived", dt, ""
    if p.returncode == 5:
        return "no tests", dt, ""
    return "killed", dt, failed[0] if failed else p.stdout.strip().splitlines()[-1:]


def mutate_and_run(copy, module, start, end, repl, timeout, extra=()):
    path = copy / "ctt" / f"{module}.py"
    original = path.read_text()
    try:
        path.write_text(original[:start] + repl + original[end:])
        try:
            compile(path.read_text(), str(path), "exec")
        except SyntaxError:
            return "invalid", 0.0, ""
        return run_tests(copy, module, timeout, extra)
    finally:
        path.write_text(original)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--table", action="store_true", help="run the survey's named mutations (issue 15)")
    ap.add_argument("--max", type=int, default=40, help="mutants in the broad sample (default 40)")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--modules", default=",".join(TESTS), help="comma-separated modules to mutate")
    ap.add_argument("--fast", action="store_true", help="deselect tests marked slow")
    ap.add_argument("--timeout", type=float, default=600.0,
                    help="seconds per mutant; a mutant that runs out of time is counted apart (neither killed "
                         "nor survived: on a loaded machine it says nothing)")
    ap.add_argument("--list", action="store_true", help="only count the candidate mutations per module")
    ap.add_argument("--json", metavar="PATH", help="also write every mutant's outcome and the totals to PATH")
    ap.add_argument("--replay", metavar="PATH",
                    help="instead of a new sample, run again the survivors listed in a --json file (same "
                         "module, line and mutation; one whose source line has changed is reported as not found)")
    a = ap.parse_args(argv)
    extra = ["-m", "not slow"] if a.fast else []
    modules = [m for m in a.modules.split(",") if m]

    if a.list:
        for m in modules:
            print(f"{m:12s} {len(candidate_mutations((ROOT / 'ctt' / f'{m}.py').read_text())):5d} candidates")
        return 0

    # a SIGTERM must still restore and remove the copy (the finally clause below)
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))
    copy = make_copy()
    print(f"mutation check: tree copied to {copy.name}/ beside the repository; tests per module: "
          f"{'not slow' if a.fast else 'all'} of the module's files, -x, demo regeneration deselected")
    try:
        rows = []
        if a.table:
            for name, module, old, new in TABLE:
                src = (copy / "ctt" / f"{module}.py").read_text()
                k = src.find(old)
                if k < 0 or src.count(old) != 1:
                    print(f"  ?? {name}: source text not found once in ctt/{module}.py (code changed?)")
                    rows.append((name, "not applied", 0.0, ""))
                    continue
                res, dt, by = mutate_and_run(copy, module, k, k + len(old), new, a.timeout, extra)
                rows.append((name, res, dt, by))
                print(f"  {res:16s} {dt:6.1f} s  {name}" + (f"  <- {by}" if by else ""), flush=True)
            bad = [r for r in rows if r[1] != "killed"]
            print(f"table: {len(rows) - len(bad)} of {len(rows)} killed")
            return 1 if bad else 0

        rng = random.Random(a.seed)
        # stratified: the same share of the sample from each module (a module with a long
        # coefficient table would otherwise dominate a plain random draw)
        sample, n_pool = [], 0
        for i, m in enumerate(modules):
            src = (copy / "ctt" / f"{m}.py").read_text()
            pool = [(m, *c) for c in candidate_mutations(src)]
            n_pool += len(pool)
            k = a.max // len(modules) + (1 if i < a.max % len(modules) else 0)
            sample += rng.sample(pool, min(k, len(pool)))
        print(f"{n_pool} candidate mutations in {', '.join(modules)}; sampling {len(sample)}, "
              f"stratified by module (seed {a.seed})")
        if a.replay:
            # a row is found by its code line when the file gives it (lines may have moved since),
            # else by its line number; the mutation text and column must match too
            wanted = [(r["module"], r["line"], r["mutation"], r.get("column"), r.get("code"))
                      for r in json.loads(pathlib.Path(a.replay).read_text())["mutants"] if r["result"] == "survived"]
            sample = []
            for m, line, desc, col, code in wanted:
                src = (copy / "ctt" / f"{m}.py").read_text()
                starts, lines = _offsets(src), src.splitlines()
                hits = [(m, *c) for c in candidate_mutations(src) if c[0] == desc
                        and (col is None or c[1] - starts[c[4]] == col)
                        and (lines[c[4] - 1].strip() == code if code else c[4] == line)]
                hits.sort(key=lambda h: abs(h[5] - line))
                if hits:
                    sample.append(hits[0])
                else:
                    print(f"  ?? ctt/{m}.py:{line}: {desc}: not found in the current source")
            print(f"replaying the {len(sample)} survivors of {a.replay}")
        # round-robin over the modules, so that a run cut short still covers each of them
        per_mod = {}
        for r in sorted(sample, key=lambda r: (r[0], r[2])):
            per_mod.setdefault(r[0], []).append(r)
        sample = [r for k in range(max(map(len, per_mod.values()), default=0))
                  for m in modules if k < len(per_mod.get(m, [])) for r in [per_mod[m][k]]]
        t0 = time.perf_counter()
        line_starts = {m: _offsets((copy / "ctt" / f"{m}.py").read_text()) for m in modules}
        line_text = {m: (copy / "ctt" / f"{m}.py").read_text().splitlines() for m in modules}
        known = explained_survivors(copy / "scripts" / "mutation_survivors.md")
        for m, desc, start, end, repl, line in sample:
            res, dt, by = mutate_and_run(copy, m, start, end, repl, a.timeout, extra)
            rows.append((m, line, desc, res, dt, by, start - line_starts[m][line]))
            print(f"  {res:16s} {dt:6.1f} s  ctt/{m}.py:{line}: {desc}" + (f"  <- {by}" if by else ""), flush=True)
        wall = time.perf_counter() - t0
        valid = [r for r in rows if r[3] in ("killed", "survived")]
        surv = [r for r in valid if r[3] == "survived"]
        n_to = sum(r[3] == "timeout" for r in rows)
        print(f"\n{len(valid)} decided mutants ({len(rows) - len(valid) - n_to} invalid, {n_to} timed out), "
              f"{len(surv)} survived: survival rate {100.0 * len(surv) / max(1, len(valid)):.1f} %  "
              f"({wall:.0f} s wall)")
        klass = {id(r): explain(known, r[0], line_text[r[0]][r[1] - 1], r[2], r[6]) for r in surv}
        unexplained = [r for r in surv if klass[id(r)] is None]
        per_module = {}
        for m in modules:
            dec = [r for r in valid if r[0] == m]
            per_module[m] = {"decided": len(dec), "survived": sum(r[3] == "survived" for r in dec),
                             "unexplained": sum(r[0] == m for r in unexplained)}
            print(f"  {m:12s} {per_module[m]['survived']:3d} of {len(dec):3d} survived, "
                  f"{per_module[m]['unexplained']} not explained")
        for r in surv:
            print(f"  SURVIVOR ctt/{r[0]}.py:{r[1]}: {r[2]}  [{klass[id(r)] or 'NOT EXPLAINED'}]")
        print(f"{len(surv) - len(unexplained)} of the {len(surv)} survivors are explained in "
              f"scripts/mutation_survivors.md; unexplained: {len(unexplained)} of {len(valid)} decided "
              f"({100.0 * len(unexplained) / max(1, len(valid)):.1f} %)")
        if a.json:
            pathlib.Path(a.json).write_text(json.dumps({
                "seed": a.seed, "max": a.max, "fast": a.fast, "modules": modules, "wall_s": round(wall, 1),
                "decided": len(valid), "survived": len(surv), "timed_out": n_to,
                "unexplained": len(unexplained),
                "survival_rate": len(surv) / max(1, len(valid)), "per_module": per_module,
                "mutants": [{"module": r[0], "line": r[1], "column": r[6], "mutation": r[2], "result": r[3],
                             "seconds": round(r[4], 1), "killed_by": r[5] if isinstance(r[5], str) else " ".join(r[5]),
                             "code": line_text[r[0]][r[1] - 1].strip(), "explained_as": klass.get(id(r))}
                            for r in rows]}, indent=1, ensure_ascii=False) + "\n")
        return 0
    finally:
        shutil.rmtree(copy, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
