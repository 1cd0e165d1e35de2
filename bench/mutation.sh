#!/usr/bin/env bash
# Mutation testing of the forming of M, f, the constraint terms (G, gamma), the point-force
# virtual work, the energy function and the energy audit.  See bench/mutation.md.
#
#   bash bench/mutation.sh            # all named functions, 2 workers
#   JOBS=1 bash bench/mutation.sh 'calcsheaf.mechanics.lagrange.x_derive__mutmut_*'
#   EXTREMES=1 bash bench/mutation.sh # the extremes: verification/extremes.py and the
#                                     # peak/max/min queries of verification/queries.py
#
# mutmut (from PyPI; the `dev` extra) works on a copy of src/ and tests/ in $MUTATION_DIR,
# so the worktree is never edited.  Its results stay there (mutmut results / mutmut show NAME).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
PYTHON=${PYTHON:-$ROOT/.venv/bin/python}
SUFFIX=""; if [ "${EXTREMES:-0}" = 1 ]; then SUFFIX="-extremes"; fi
WORK=${MUTATION_DIR:-/tmp/calcsheaf-mutation$SUFFIX}
JOBS=${JOBS:-2}
if [ "${EXTREMES:-0}" = 1 ]; then
# The extremes between samples: the finder (extremes.py, with the two properties of
# Extremes) and the query code that feeds it (queries.py: the switch arguments, the
# switching times and values along the dense solution, and _query, of which only the
# peak/max/min branch is in scope; its other mutants are listed apart in mutation.md).
TESTS=(tests/test_extremes_unit.py tests/test_extremes.py)
MUTATE=(src/calcsheaf/verification/extremes.py src/calcsheaf/verification/queries.py)
PROPERTIES=(src/calcsheaf/verification/extremes.py:switching_times)
DESELECT=""
DEFAULT_TARGETS=(
  'calcsheaf.verification.extremes.x_switching_times__mutmut_*'
  'calcsheaf.verification.extremes.x_extremes__mutmut_*'
  'calcsheaf.verification.extremes.x__refined_max__mutmut_*'
  'calcsheaf.verification.extremes.xǁExtremesǁ*_method__mutmut_*'
  'calcsheaf.verification.queries.x_switch_arguments__mutmut_*'
  'calcsheaf.verification.queries.xǁQueryContextǁextremes__mutmut_*'
  'calcsheaf.verification.queries.xǁQueryContextǁswitches__mutmut_*'
  'calcsheaf.verification.queries.xǁQueryContextǁ_query__mutmut_*'
)
else
# The tests that kill mutants of these functions without long time histories.
TESTS=(tests/test_lagrange_check.py tests/test_energy_jumps.py tests/test_derivation.py
       tests/test_energy_function.py
)
MUTATE=(src/calcsheaf/mechanics/lagrange.py src/calcsheaf/mechanics/energy.py)
PROPERTIES=(src/calcsheaf/mechanics/lagrange.py:point_force_Q)
# The planted-defect tests read lagrange.py itself, which mutmut has rewritten.
DESELECT="not planted_defects and not a_derivation_defect"
# Functions whose mutants are run: derivation (M, f, G, gamma, Q by virtual work, the energy
# function and powers) and the energy audit with its switch jumps.  Left out: the notes
# (text), the page steps (_steps), and natural()/homogeneity_degree(), which only choose notes.
DEFAULT_TARGETS=(
  'calcsheaf.mechanics.lagrange.x_diff_ae__mutmut_*'
  'calcsheaf.mechanics.lagrange.x_jacobian_ae__mutmut_*'
  'calcsheaf.mechanics.lagrange.x_point_force_Q__mutmut_*'
  'calcsheaf.mechanics.lagrange.x_derive__mutmut_*'
  'calcsheaf.mechanics.lagrange.xǁDerivationǁ*_method__mutmut_*'
  'calcsheaf.mechanics.energy.x_audit__mutmut_*'
  'calcsheaf.mechanics.energy.x_time_switches__mutmut_*'
  'calcsheaf.mechanics.energy.x_switch_times__mutmut_*'
  'calcsheaf.mechanics.energy.x_switch_jumps__mutmut_*'
  'calcsheaf.mechanics.energy.x__sides__mutmut_*'
  'calcsheaf.mechanics.energy.x_jump_work__mutmut_*'
)
fi
if [ "$#" -gt 0 ]; then TARGETS=("$@"); else TARGETS=("${DEFAULT_TARGETS[@]}"); fi

rm -rf "$WORK"
mkdir -p "$WORK"
cp -rL "$ROOT/src" "$ROOT/tests" "$WORK/"
find "$WORK" -name __pycache__ -prune -exec rm -rf {} +
# mutmut leaves decorated functions alone, so in the copy each @property of a class
# (Derivation: energy_function, dissipated_power, input_power, explicit_time_rate;
# Extremes: peak, t_peak) becomes a plain method wrapped by property() afterwards, placed
# before the named top-level function: the same class, now mutated like any method.
for entry in "${PROPERTIES[@]}"; do
"$PYTHON" - "$WORK/${entry%%:*}" "${entry##*:}" <<'PY'
import re, sys
path, following = sys.argv[1], sys.argv[2]
text = open(path, encoding="utf-8").read()
names = re.findall(r"    @property\n    def (\w+)\(self\)", text)
text = re.sub(r"    @property\n    def (\w+)\(self\)", r"    def \1_method(self)", text)
anchor = f"\n\ndef {following}("
assert anchor in text, anchor
wrappers = "".join(f"\n    {n} = property({n}_method)" for n in names)
text = text.replace(anchor, wrappers + "\n" + anchor, 1)
open(path, "w", encoding="utf-8").write(text)
print(path, "properties made methods:", ", ".join(names))
PY
done
{
  echo "[mutmut]"
  echo "source_paths = src"
  echo "only_mutate ="
  for f in "${MUTATE[@]}"; do echo "    $f"; done
  echo "pytest_add_cli_args_test_selection ="
  for t in "${TESTS[@]}"; do echo "    $t"; done
  echo "pytest_add_cli_args ="
  echo "    -p"
  echo "    no:cacheprovider"
  if [ -n "$DESELECT" ]; then echo "    -k"; echo "    $DESELECT"; fi
} > "$WORK/setup.cfg"
cd "$WORK"
unset PYTHONPATH
"$PYTHON" -m mutmut run --max-children "$JOBS" "${TARGETS[@]}" || true
"$PYTHON" -m mutmut results --all true > results.txt || true
echo "killed:   $(grep -c ': killed$' results.txt || true)"
echo "survived: $(grep -c ': survived$' results.txt || true)"
echo "other:    $(grep -v -c -E ': (killed|survived)$' results.txt || true)"
