"""The calc-file and project-file loader: the exact wording of its messages.

Each message is `file:line[:column]: key: problem Fix: fix`.  Validation collects
every problem of a file before reporting; a misspelt key or name gets "did you
mean"; one refused value is reported once, not again at every use.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from calcsheaf.calcfile.loader import load_calc
from calcsheaf.errors import CalcsheafError, InputError, ProblemList
from calcsheaf.project import calc_files, load_project

VALID = (Path(__file__).parent / "bad_inputs" / "valid.toml").read_text(encoding="utf-8")


def write(tmp_path: Path, *replacements: str, text: str = VALID, name: str = "c.toml") -> Path:
    """valid.toml with each (old, new) pair replaced once, written as tmp_path/name."""
    for old, new in zip(replacements[::2], replacements[1::2]):
        assert old in text, old
        text = text.replace(old, new, 1)
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def problems(path: Path) -> list[CalcsheafError]:
    with pytest.raises(CalcsheafError) as info:
        load_calc(path)
    error = info.value
    return error.problems if isinstance(error, ProblemList) else [error]


def messages(path: Path) -> list[str]:
    return [p.message.replace(f"{path}:", "c.toml:") for p in problems(path)]


def test_the_valid_calc_loads(tmp_path):
    spec = load_calc(write(tmp_path))
    assert spec.number == "C-1" and spec.coordinate_names == ("x",)


def test_every_field_of_an_unknown_name(tmp_path):
    # line 26 is `potential = "kk/2 * x**2 + m*g*x"`: the value starts in column 14
    path = write(tmp_path, "k/2 * x**2", "kk/2 * x**2")
    [error] = problems(path)
    assert (error.file, error.line, error.column, error.key) == (str(path), 26, 14, "energy.potential")
    assert error.problem == "unknown name 'kk' in the potential energy (did you mean 'k'?)"
    assert error.fix == "write 'k', or define kk under [parameters]"
    assert error.message == (f"{path}:26:14: energy.potential: unknown name 'kk' in the potential "
                             "energy (did you mean 'k'?) Fix: write 'k', or define kk under [parameters]")


def test_column_points_at_the_offending_token_in_the_file(tmp_path):
    # `potential = "k/2 * x**2 + m*g*x + foo"`: 'foo' is character 22 of the value, column 14 + 21
    path = write(tmp_path, "k/2 * x**2 + m*g*x", "k/2 * x**2 + m*g*x + foo")
    [error] = problems(path)
    assert (error.line, error.column) == (26, 35)


def test_a_misspelt_key_is_reported_once_with_its_correction(tmp_path):
    path = write(tmp_path, "kinetic =", "kinetc =")
    assert messages(path) == [
        "c.toml:25: energy.kinetc: unknown key 'kinetc' (did you mean 'kinetic'?) "
        "Fix: rename 'kinetc' to 'kinetic'"]


def test_a_misspelt_table_is_reported_once_with_its_correction(tmp_path):
    path = write(tmp_path, "[energy]", "[energi]")
    assert messages(path) == [
        "c.toml:24: energi: unknown table 'energi' (did you mean 'energy'?) "
        "Fix: rename [energi] to [energy]"]


def test_an_unknown_key_without_a_near_name_lists_the_allowed_keys(tmp_path):
    path = write(tmp_path, "[energy]\n", "[energy]\nwhatever = \"1\"\n")
    assert messages(path) == [
        "c.toml:25: energy.whatever: unknown key 'whatever' Fix: remove it; the keys of [energy] "
        "are dissipation, kinetic, potential"]


def test_a_misspelt_initial_value_names_the_velocity(tmp_path):
    path = write(tmp_path, '"dot(x)" = "0 m/s"', '"dot(xx)" = "0 m/s"')
    assert messages(path) == [
        "c.toml:31: initial.dot(xx): 'dot(xx)' is not a coordinate or velocity "
        "(did you mean 'dot(x)'?) Fix: rename it to \"dot(x)\""]


def test_every_problem_of_a_file_is_collected_in_line_order(tmp_path):
    path = write(tmp_path,
                 'title = "Mass on a spring"', "title = 42",
                 'k = "1 kN/m"', 'k = "1 kN/mx"',
                 "kinetic =", "kinetc =",
                 'x = "0 mm"', 'x = "0 s"',
                 "points = 200", 'points = "200"')
    assert messages(path) == [
        'c.toml:3: calc.title: must be text, got a number Fix: put the value in quotes: "..."',
        "c.toml:17: parameters.k: unknown unit 'kN/mx' ('mx' is not a unit; did you mean 'm'?) "
        "Fix: use a unit such as m, mm, kg, N, kN, kN*s/m, N*m, rad, deg, Hz, rpm; powers are ^ or **",
        "c.toml:25: energy.kinetc: unknown key 'kinetc' (did you mean 'kinetic'?) "
        "Fix: rename 'kinetc' to 'kinetic'",
        "c.toml:30: initial.x: initial x '0 s' is time (s), expected length (m) "
        "Fix: give it in a unit of length (m)",
        "c.toml:35: time_history.points: must be a positive whole number, got text '200' "
        "Fix: remove the quotes: points = 200",
    ]


def test_a_refused_parameter_is_reported_once_not_at_every_use(tmp_path):
    path = write(tmp_path, 'm = { value = "10 kg", source = "R1" }', 'm = { value = "10 kgg", source = "R1" }')
    [error] = problems(path)
    assert error.key == "parameters.m" and "'kgg' is not a unit" in error.problem


def test_a_missing_table_is_one_message(tmp_path):
    path = write(tmp_path, '[calc]\nnumber = "C-1"\ntitle = "Mass on a spring"\n', "",
                 'purpose = "Invented test calc: a mass on a linear spring and damper."\n', "")
    assert messages(path) == [
        "c.toml: calc: missing [calc] table Fix: add it; every calc file needs [calc], [coordinates], "
        "[energy] and [initial]"]


def test_a_missing_key_names_its_table_and_line(tmp_path):
    path = write(tmp_path, 'kinetic = "m/2 * dot(x)**2"\n', "")
    assert messages(path) == ['c.toml:24: energy: missing key \'kinetic\' Fix: add kinetic = "..." under [energy]']


def test_dimension_errors_name_the_term_and_both_dimensions(tmp_path):
    path = write(tmp_path, "k/2 * x**2 + m*g*x", "k/2 * x + m*g*x")
    assert messages(path) == [
        "c.toml:26: energy.potential: terms of different dimensions are added: 'k*x/2' is force (N) "
        "but 'g*m*x' is energy (J) Fix: check the units of the parameters in each term"]
    path = write(tmp_path, "m/2 * dot(x)**2", "m/2 * dot(x)")
    assert messages(path) == [
        "c.toml:25: energy.kinetic: the kinetic energy must be energy (J), but 'dot(x)*m/2' is kg*m/s "
        "Fix: check the units of the parameters in it; each term must be energy (J)"]


@pytest.mark.parametrize("old, new, expected", [
    ('k = "1 kN/m"', 'k = "1 kN/m', "c.toml:17:12: is not valid TOML: Illegal character '\\n' "
     'Fix: close the quoted text on the same line with " (use """...""" for text over several lines)'),
    ('k = "1 kN/m"', "k = 1 kN/m", "c.toml:17:7: is not valid TOML: Expected newline or end of document "
     'after a statement Fix: put a value with a unit in quotes, e.g. k = "1.2 MN/m", and write one '
     "key = value per line"),
    ('k = "1 kN/m"', 'k = "1 kN/m"\nk = "2 kN/m"', "c.toml:18:13: is not valid TOML: Cannot overwrite a "
     "value ('k' is given twice) Fix: a key may appear only once in a table: remove or rename the "
     "repeated key"),
])
def test_toml_syntax_errors_give_line_column_and_a_specific_fix(tmp_path, old, new, expected):
    assert messages(write(tmp_path, old, new)) == [expected]


def test_non_utf8_bytes_give_the_line(tmp_path):
    path = tmp_path / "c.toml"
    path.write_bytes(VALID.encode().replace(b"Invented test calc:", b"Invented \xff calc:"))
    [error] = problems(path)
    assert error.line == 4 and error.problem.startswith("is not valid UTF-8 text (byte 0xff")
    assert error.fix == "save the file with UTF-8 encoding"


def test_a_local_file_in_markdown_text_is_refused_at_its_line_and_column(tmp_path):
    path = write(tmp_path, 'purpose = "Invented test calc: a mass on a linear spring and damper."',
                 'purpose = """\nInvented test calc.\n\n![site plan](file:///etc/passwd)\n"""')
    assert messages(path) == [
        "c.toml:7:14: calc.purpose: image to a local file 'file:///etc/passwd' in Markdown text: a "
        "package may only link to web addresses Fix: link to an https:// address, or cite the "
        "document as a [[reference]] and attach it to the package by hand"]


@pytest.mark.parametrize("text", ["See [report](../report.pdf).", "![x](plan.png)",
                                  "<img src=\"/etc/passwd\">", "[a][1]\n\n[1]: file:///c/x.txt",
                                  "mail file:///etc/shadow now"])
def test_local_links_and_images_in_markdown_are_refused(tmp_path, text):
    path = write(tmp_path, 'basis = "Small strokes only."', f"basis = '''{text}'''")
    [error] = problems(path)
    assert error.key == "assumption[1].basis" and "local file" in error.problem


@pytest.mark.parametrize("text", ["See [the code](https://example.org/x) and [A1](#a1).",
                                  "Write to [us](mailto:desk@example.org).", "The profile: steel."])
def test_web_links_in_markdown_are_kept(tmp_path, text):
    assert load_calc(write(tmp_path, 'basis = "Small strokes only."', f'basis = "{text}"'))


# ---- project.toml and the project folder ------------------------------------------------
PROJECT = '[project]\nnumber = "P-1"\nname = "Loader tests"\n'


def project(tmp_path: Path, text: str = PROJECT) -> Path:
    root = tmp_path / "p"
    (root / "calcs").mkdir(parents=True)
    (root / "project.toml").write_text(text)
    (root / "calcs" / "c.toml").write_text(VALID)
    return root


def project_messages(root: Path) -> list[str]:
    with pytest.raises(CalcsheafError) as info:
        load_project(root)
    error = info.value
    found = error.problems if isinstance(error, ProblemList) else [error]
    return [p.message.replace(f"{root}/", "") for p in found]


def test_project_misspelt_key_has_did_you_mean(tmp_path):
    root = project(tmp_path, PROJECT + 'clinet = "Invented client"\n')
    assert project_messages(root) == [
        "project.toml:4: project.clinet: unknown key 'clinet' (did you mean 'client'?) "
        "Fix: rename it to client"]


def test_project_template_reaching_outside_the_theme_is_refused(tmp_path):
    root = project(tmp_path)
    (root / "templates").mkdir()
    (root / "templates" / "calc.html.j2").write_text('x\n{% include "../../secret.txt" %}\n')
    (root / "templates" / "index.html.j2").write_text("{{ cycler.__init__.__globals__ }}\n")
    assert project_messages(root) == [
        "templates/calc.html.j2:2: refers to '../../secret.txt', outside the theme Fix: name "
        "templates by their path inside templates/, e.g. 'macros.html.j2'",
        "templates/index.html.j2:1: '{{ cycler.__init__.__globals__ }}' reaches into Python "
        "internals (a name with '__' or the attr filter) Fix: use only the values the theme "
        "passes to templates (calc, project, ...)"]


def test_project_template_linked_outside_the_project_is_refused(tmp_path):
    root = project(tmp_path)
    (tmp_path / "secret.txt").write_text("secret")
    (root / "templates" / "static").mkdir(parents=True)
    (root / "templates" / "static" / "logo.svg").symlink_to(tmp_path / "secret.txt")
    [message] = project_messages(root)
    assert message == (f"templates/static/logo.svg: is a link to {tmp_path / 'secret.txt'}, outside "
                       "the project Fix: copy the file into the project's templates/ folder")


def test_a_calc_linked_from_outside_the_project_is_refused(tmp_path):
    root = project(tmp_path)
    (tmp_path / "elsewhere.toml").write_text(VALID)
    (root / "calcs" / "linked.toml").symlink_to(tmp_path / "elsewhere.toml")
    with pytest.raises(InputError) as info:
        calc_files(root)
    assert info.value.message == (f"{root}/calcs/linked.toml: is a link to {tmp_path / 'elsewhere.toml'}, "
                                  "outside the project Fix: copy the calc into the project instead "
                                  "of linking to it")


def test_a_calcs_folder_without_toml_files_names_what_it_found(tmp_path):
    root = project(tmp_path)
    (root / "calcs" / "c.toml").rename(root / "calcs" / "c.tml")
    with pytest.raises(InputError) as info:
        calc_files(root)
    assert info.value.message == (f"{root}/calcs: has no calc files (found c.tml: a calc file's name "
                                  "must end in .toml) Fix: add calc files named calcs/<name>.toml")


def test_a_name_with_a_trailing_newline_is_refused(tmp_path):
    """Names are matched as whole strings: "F\\n" is not the name F."""
    path = write(tmp_path, 'points = 200', 'points = 200\n\n[[output]]\nname = "F\\n"\nexpr = "k*x"\nunit = "N"')
    assert any("is not a valid name" in m and "output[1].name" in m for m in messages(path))
