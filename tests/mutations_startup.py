"""Planted bugs in the start-up helpers: the first-run notice and the helper process that
compiles kernel groups beside a run (``sphex.compiling``), and what a short command-line
call loads and does at its end (``sphex.cli.parser``, ``sphex.grids``).

Run with ``python tests/mutations.py --only startup-``.
"""
from _mutation import _m

COMPILING = "sphex/compiling.py"
T_STARTUP = "tests/test_startup.py"
PARSER = "sphex/cli/parser.py"
GRIDS = "sphex/grids.py"
T_GRIDS = "tests/test_grids.py"

MUTATIONS = [
    _m("startup-stale-index-counts-as-cached", COMPILING,
       "min(p.stat().st_mtime for p in index) >= newest",
       "max(p.stat().st_mtime for p in index) >= newest", T_STARTUP),
    _m("startup-inlined-sources-ignored", COMPILING,
       "for name in (f\"{module}.py\",) + _INLINED)",
       "for name in (f\"{module}.py\",))", T_STARTUP),
    _m("startup-notice-into-pipes", COMPILING,
       "return bool(isatty and isatty())", "return True", T_STARTUP),
    _m("startup-notice-repeated", COMPILING,
       "    _told.update(todo)\n", "", T_STARTUP),
    _m("startup-cache-dir-ignores-numba-setting", COMPILING,
       "    if chosen:\n        return [Path(chosen).resolve() / subpath]\n", "", T_STARTUP),
    _m("startup-beside-helper-with-narrow-vectors", COMPILING,
       'env = dict(os.environ, SPHEX_COMPILE_NOTICE="0")',
       'env = dict(os.environ, SPHEX_COMPILE_NOTICE="0", SPHEX_WIDE_VECTORS="0")', T_STARTUP),
    _m("startup-beside-group-cached-when-one-function-is", COMPILING,
       "return any(_stale_or_missing(module, f, kernels) for f in functions)",
       "return all(_stale_or_missing(module, f, kernels) for f in functions)", T_STARTUP),
    _m("startup-beside-says-compiled-before-compiling", COMPILING,
       '        _compile_group(group)\n        print(f"compiled {group}", flush=True)\n',
       '        print(f"compiled {group}", flush=True)\n        _compile_group(group)\n', T_STARTUP),
    _m("startup-beside-second-helper-for-a-group-already-compiling", COMPILING,
       "and set(groups) <= _beside.asked):", "and set(groups) <= set(_beside.groups)):",
       T_STARTUP + "::test_a_run_asking_again_for_its_groups_gets_the_helper_already_started"),
    _m("startup-beside-stop-lets-the-helper-run", COMPILING,
       "        if self.process.poll() is None:\n            self.process.kill()\n", "", T_STARTUP),
    _m("startup-no-freeze-before-the-process-ends", PARSER,
       "    if argv is None:\n        gc.freeze()\n", "", T_STARTUP),
    _m("startup-freeze-in-calls-from-python", PARSER,
       "    if argv is None:\n        gc.freeze()\n", "    gc.freeze()\n", T_STARTUP),
    _m("startup-old-generations-never-collected-again", PARSER,
       "            gc.set_threshold(*thresholds)\n", "            pass\n", T_STARTUP),
    _m("startup-window-ends-at-once", PARSER,
       "if held[0] and time.monotonic() >= until:", "if held[0] and time.monotonic() < until:",
       T_STARTUP),
    _m("startup-collector-untouched", PARSER,
       "    gc.set_threshold(thresholds[0], 1 << 30, 1 << 30)\n", "", T_STARTUP),
    _m("startup-collector-tuned-in-calls-from-python", PARSER,
       "    if argv is None:\n        _collect_young_only_at_start()\n",
       "    _collect_young_only_at_start()\n", T_STARTUP),
    _m("startup-grid-weights-computed-when-recognised", GRIDS,
       'return cls("equiangular-" + layout, colat, None, nlon, lon0, north_first)',
       'return cls("equiangular-" + layout, colat, equiangular_nodes(nlat, layout)[1], nlon, lon0,'
       ' north_first)', T_STARTUP),
    _m("startup-gauss-estimate-without-newton-steps", GRIDS,
       "    for _ in range(3):\n        p_prev = np.ones_like(x)",
       "    for _ in range(0):\n        p_prev = np.ones_like(x)", T_GRIDS),
    _m("startup-gauss-nodes-on-first-use-not-flipped", GRIDS,
       "            if not self.north_first:\n                colat = colat[::-1].copy()\n"
       "                weights = weights[::-1].copy()\n",
       "", T_GRIDS),
    _m("startup-gauss-grid-recognised-with-the-kernel", GRIDS,
       "if nlat <= GAUSS_ESTIMATE_MAX:", "if nlat < 0:",
       T_STARTUP + "::test_inspect_loads_no_kernels_plots_or_cluster"),
    _m("startup-given-weights-not-in-grid-order", GRIDS,
       "            if weights is not None:\n                weights = weights[::-1].copy()\n",
       "            if weights is not None:\n                pass\n", T_GRIDS),
    _m("startup-weights-on-first-use-writable", GRIDS,
       "        weights.setflags(write=False)\n", "", T_GRIDS),
]
