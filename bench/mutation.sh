#!/usr/bin/env bash
# Mutation testing of the forming of M, f, the constraint terms (G, gamma), the point-force
# virtual work, the energy function and the energy audit.  See bench/mutation.md.
#
#   bash bench/mutation.sh            # all named functions, 2 workers
#   JOBS=1 bash bench/mutation.sh 'calcsheaf.mechanics.lagrange.x_derive__mutmut_*'
#
# mutmut (from PyPI; the `dev` extra) works on a copy of src/ and tests/ in $MUTATION_DIR,
# so the worktree is never edited.  Its results stay there (mutmut results / mutmut show NAME).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
PYTHON=${PYTHON:-$ROOT/.venv/bin/python}
WORK=${MUTATION_DIR:-/tmp/calcsheaf-mutation}
JOBS=${JOBS:-2}
# The tests that kill mutants of these functions without long time histories.
TESTS=(tests/test_lagrange_check.py tests/test_energy_jumps.py tests/test_derivation.py
       tests/test_energy_function.py
)
# Functions whose mutants are run: derivation (M, f, G, gamma, Q by virtual work, the energy
# function and powers) and the energy audit with its switch jumps.  Notes (text) are left out.
DEFAULT_TARGETS=(
  'calcsheaf.mechanics.lagrange.x_diff_ae__mutmut_*'
  'calcsheaf.mechanics.lagrange.x_jacobian_ae__mutmut_*'
  'calcsheaf.mechanics.lagrange.x_point_force_Q__mutmut_*'
  'calcsheaf.mechanics.lagrange.x_derive__mutmut_*'
  'calcsheaf.mechanics.lagrange.xǁDerivationǁ*_method__mutmut_*'
  'calcsheaf.mechanics.energy.x_audit__mutmut_*'
  'calcsheaf.mechanics.energy.x_natural__mutmut_*'
  'calcsheaf.mechanics.energy.x_homogeneity_degree__mutmut_*'
  'calcsheaf.mechanics.energy.x_time_switches__mutmut_*'
  'calcsheaf.mechanics.energy.x_switch_times__mutmut_*'
  'calcsheaf.mechanics.energy.x_switch_jumps__mutmut_*'
  'calcsheaf.mechanics.energy.x__sides__mutmut_*'
  'calcsheaf.mechanics.energy.x_jump_work__mutmut_*'
)
if [ "$#" -gt 0 ]; then TARGETS=("$@"); else TARGETS=("${DEFAULT_TARGETS[@]}"); fi

rm -rf "$WORK"
mkdir -p "$WORK"
cp -rL "$ROOT/src" "$ROOT/tests" "$WORK/"
find "$WORK" -name __pycache__ -prune -exec rm -rf {} +
# mutmut leaves decorated functions alone, so in the copy each @property of Derivation
# (energy_function, dissipated_power, input_power, explicit_time_rate) becomes a plain
# method wrapped by property() afterwards: the same class, now mutated like any method.
"$PYTHON" - "$WORK/src/calcsheaf/mechanics/lagrange.py" <<'PY'
import re, sys
path = sys.argv[1]
text = open(path, encoding="utf-8").read()
names = re.findall(r"    @property\n    def (\w+)\(self\)", text)
text = re.sub(r"    @property\n    def (\w+)\(self\)", r"    def \1_method(self)", text)
anchor = "\n\ndef point_force_Q("
wrappers = "".join(f"\n    {n} = property({n}_method)" for n in names)
text = text.replace(anchor, wrappers + "\n" + anchor, 1)
open(path, "w", encoding="utf-8").write(text)
print("properties made methods:", ", ".join(names))
PY
{
  echo "[mutmut]"
  echo "source_paths = src"
  echo "only_mutate ="
  echo "    src/calcsheaf/mechanics/lagrange.py"
  echo "    src/calcsheaf/mechanics/energy.py"
  echo "pytest_add_cli_args_test_selection ="
  for t in "${TESTS[@]}"; do echo "    $t"; done
  echo "pytest_add_cli_args ="
  echo "    -p"
  echo "    no:cacheprovider"
  # The planted-defect tests read lagrange.py itself, which mutmut has rewritten.
  echo "    -k"
  echo "    not planted_defects and not a_derivation_defect"
} > "$WORK/setup.cfg"
cd "$WORK"
unset PYTHONPATH
"$PYTHON" -m mutmut run --max-children "$JOBS" "${TARGETS[@]}" || true
"$PYTHON" -m mutmut results --all true > results.txt || true
echo "killed:   $(grep -c ': killed$' results.txt || true)"
echo "survived: $(grep -c ': survived$' results.txt || true)"
echo "other:    $(grep -v -c -E ': (killed|survived)$' results.txt || true)"
