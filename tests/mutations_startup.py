"""Planted bugs in the start-up helpers of ``sphex.compiling``: the first-run notice and the
helper process that compiles kernel groups beside a run.

Run with ``python tests/mutations.py --only startup-``.
"""
from _mutation import _m

COMPILING = "sphex/compiling.py"
T_STARTUP = "tests/test_startup.py"

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
    _m("startup-beside-stop-lets-the-helper-run", COMPILING,
       "        if self.process.poll() is None:\n            self.process.kill()\n", "", T_STARTUP),
]
