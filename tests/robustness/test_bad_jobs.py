"""Bad job files: each exits with code 2 and one message naming the file, key and expectation,
and leaves no results file behind."""

import re

import pytest
from typer.testing import CliRunner

from sweepcli.cli import app

GOOD = """
[job]
name = "small"
[model]
name = "qwz"
[params]
t = 1.0
[sweep]
m = { start = -1.0, stop = 1.0, num = 3 }
[measure.gap]
[output]
path = "OUT"
"""


def run_bad(tmp_path, text):
    out = tmp_path / "out.h5"
    job = tmp_path / "bad.toml"
    job.write_text(text.replace("OUT", str(out)))
    result = CliRunner().invoke(app, ["run", str(job)])
    assert result.exit_code == 2, result.output
    assert not out.exists() and not (tmp_path / "out.h5.tmp").exists()
    lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.output
    return lines[0].removeprefix("error: ").replace(str(job), "JOB")


def test_good_job_runs(tmp_path):
    job = tmp_path / "good.toml"
    job.write_text(GOOD.replace("OUT", str(tmp_path / "out.h5")))
    result = CliRunner().invoke(app, ["run", str(job), "--no-progress"])
    assert result.exit_code == 0, result.output
    assert (tmp_path / "out.h5").exists()


def test_malformed_toml_names_line_and_column(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", "t = = 1.0"))
    assert re.match(r"JOB:7:5: invalid TOML: Invalid value", msg), msg


def test_unknown_table_suggests(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("[sweep]", "[sweeps]"))
    assert msg == ("JOB: unknown table [sweeps] (allowed: job, model, params, sweep, refine, "
                   "drive, measure, confirm, predict, output). Did you mean 'sweep'?")


def test_unknown_parameter_suggests(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", "tt = 1.0"))
    assert msg == "JOB: [params] has an unknown parameter 'tt' (allowed: m, t). Did you mean 't'?"


def test_float_for_a_count_is_refused(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("num = 3", "num = 3.0"))
    assert msg == "JOB: [sweep.m] num must be an integer in [1, inf); got 3.0."


def test_boolean_is_never_a_number(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", "t = true"))
    assert msg == "JOB: [params] t must be a real number; got true."


def test_integer_accepted_for_a_real(tmp_path):
    job = tmp_path / "int.toml"
    job.write_text(GOOD.replace("t = 1.0", "t = 1").replace("OUT", str(tmp_path / "o.h5")))
    assert CliRunner().invoke(app, ["check", str(job)]).exit_code == 0


def test_empty_list_range(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("m = { start = -1.0, stop = 1.0, num = 3 }", "m = []"))
    assert msg.startswith("JOB: [sweep] m must be a list of values or a table")
    assert msg.endswith("got []. The list is empty.")


def test_empty_linear_range(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("stop = 1.0", "stop = -1.0"))
    assert msg == ("JOB: [sweep.m] stop must be different from start when num > 1; got -1.0. "
                   "The range is empty.")


def test_unknown_model_suggests(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace('name = "qwz"', 'name = "qzw"'))
    assert msg.startswith("JOB: [model] name must be a built-in model or \"custom\"")
    assert msg.endswith("got 'qzw'. Did you mean 'qwz'?")


def test_code_in_an_expression_is_refused(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", "t = \"__import__('os').system('x')\""))
    assert msg.startswith("JOB: [params] t must be a number or an arithmetic expression; got")
    assert "which is not an allowed function" in msg


def test_expression_naming_unknown_parameter(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", 't = "2*mm"'))
    assert msg == ("JOB: [params] t must be an expression of defined parameters; got '2*mm'. "
                   "'mm' is not defined in [params] or [sweep]. Did you mean 'm'?")


def test_expression_cycle(tmp_path):
    text = GOOD.replace("t = 1.0", 't = "2*u"\nu = "t/2"')
    msg = run_bad(tmp_path, text)
    assert "refer to each other in a cycle" in msg


def test_required_model_parameter_missing(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("m = { start = -1.0, stop = 1.0, num = 3 }",
                                         "t = { start = 0.5, stop = 1.0, num = 2 }")
                  .replace("t = 1.0\n", ""))
    assert msg.startswith("JOB: [params] m is required by model 'qwz'")


def test_unknown_measurement_suggests(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("[measure.gap]", "[measure.chrn]"))
    assert msg.startswith("JOB: [measure] has an unknown measurement 'chrn'")
    assert msg.endswith("Did you mean 'chern'?")


def test_no_measurement(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("[measure.gap]", ""))
    assert msg.startswith("JOB: [measure] must be a table with at least one measurement")


def test_measurement_needing_an_operator(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("[measure.gap]", "[measure.spin_chern]"))
    assert msg == ("JOB: [measure.spin_chern] needs a model with a 'spin' operator; "
                   "model 'qwz' has none.")


def test_measurement_for_the_wrong_dimension(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("[measure.gap]", "[measure.winding]"))
    assert msg.startswith("JOB: [measure.winding] applies to 1D lattices; model 'qwz' is 2D.")


CUSTOM = """
[model]
name = "custom"
lattice = "chain"
orbitals = 2
[[model.onsite]]
matrix = "x"
coeff = "v"
[[model.onsite]]
matrix = "y"
coeff = "1j*v"
[[model.hopping]]
d = [1]
matrix = [[0, 0], [1, 0]]
coeff = "w"
[params]
w = 1.0
[sweep]
v = [0.5, 1.5]
[measure.gap]
[output]
path = "OUT"
"""


def test_non_hermitian_custom_model(tmp_path):
    msg = run_bad(tmp_path, CUSTOM)
    assert msg.startswith("JOB: [[model.onsite]] terms must add up to a Hermitian matrix; at grid "
                          "point 0 they deviate by")


def test_custom_model_matrix_of_the_wrong_size(tmp_path):
    msg = run_bad(tmp_path, CUSTOM.replace('matrix = "y"', 'matrix = "yy"').replace("1j*v", "v"))
    assert msg == ("JOB: [model.onsite.1] matrix must be a Pauli word such as \"zx\" or a square "
                   "matrix of numbers of size 2; got 'a matrix of size 4'.")


def test_flake_too_small_for_corner_regions(tmp_path):
    text = GOOD.replace('name = "qwz"', 'name = "bhz_corner"').replace("t = 1.0", "delta2 = 0.5")
    text = text.replace("[measure.gap]", "[measure.corner_modes]\nsize = 6")
    msg = run_bad(tmp_path, text)
    assert msg == ("JOB: [measure.corner_modes] size = 6 is too small: sample of 6 x 6 cells is "
                   "too small: each side needs at least 8 cells, so that corner regions of up to a "
                   "quarter of a side can hold a bound mode.")


def test_largest_doubled_flake_too_large_for_the_machine(tmp_path):
    text = GOOD.replace('name = "qwz"', 'name = "bhz_corner"').replace("t = 1.0", "delta2 = 0.5")
    text = text.replace("[measure.gap]", "[measure.corner_modes]\nsize = 16\nmax_size = 4000\n"
                                         "method = \"dense\"")
    msg = run_bad(tmp_path, text)
    assert msg.startswith("JOB: [measure.corner_modes] max_size = 4000 needs more memory than "
                          "this machine has: flake of 4000 x 4000 cells x 4 orbitals")


def test_flake_too_large_for_the_machine(tmp_path):
    text = GOOD.replace('name = "qwz"', 'name = "bhz_corner"').replace("t = 1.0", "delta2 = 0.5")
    text = text.replace("[measure.gap]", "[measure.corner_modes]\nsize = 4000\nmethod = \"dense\"")
    msg = run_bad(tmp_path, text)
    assert msg.startswith("JOB: [measure.corner_modes] size = 4000 needs more memory than this "
                          "machine has: flake of 4000 x 4000 cells x 4 orbitals")
    assert "GiB" in msg


# ---------------------------------------------------------------------------------------------
# Expressions without a value: refused at load, naming the table and key


def check_bad(tmp_path, text):
    """``sweepcli check`` on a bad job: exit 2 and one line, no traceback."""
    job = tmp_path / "bad.toml"
    job.write_text(text.replace("OUT", str(tmp_path / "out.h5")))
    result = CliRunner().invoke(app, ["check", str(job)])
    assert result.exit_code == 2, result.output
    lines = [ln for ln in result.stderr.splitlines() if ln.strip()]
    assert len(lines) == 1 and "Traceback" not in result.output, result.output
    return lines[0].removeprefix("error: ").replace(str(job), "JOB")


def test_function_name_as_a_value_is_refused(tmp_path):
    text = GOOD.replace("t = 1.0", 't = "sin + 1"')
    expected = ("JOB: [params] t must be a number or an arithmetic expression; got 'sin + 1'. "
                "'sin + 1' uses the function 'sin' as a value; call it with one argument, "
                "e.g. sin(x).")
    assert check_bad(tmp_path, text) == expected
    assert run_bad(tmp_path, text) == expected


def test_function_with_two_arguments_is_refused(tmp_path):
    assert check_bad(tmp_path, GOOD.replace("t = 1.0", 't = "sin(1, 2)"')) == (
        "JOB: [params] t must be a number or an arithmetic expression; got 'sin(1, 2)'. "
        "'sin(1, 2)': sin takes exactly one argument, e.g. sin(x).")


@pytest.mark.parametrize("expr, detail", [
    ("sqrt(-1)", "sqrt(-1) is not a real number"),
    ("log(-1)", "log(-1) is not a real number"),
    ("log(0)", "log(0) is not a finite number"),
    ("arcsin(2)", "arcsin(2) is not a real number"),
    ("1/0", "1 / 0 divides by zero"),
    ("exp(1000)", "exp(1000) is not a finite number"),
    ("(-8)**(1/3)", "(-8) ** 0.333333 is not a real number"),
    ("10**10**10", "10 ** 1e+10 overflows"),
])
def test_expression_without_a_value_is_refused(tmp_path, expr, detail):
    # These gave nan or inf silently (or a traceback); numpy's real functions are undefined
    # there, and the job must say so before any work.
    text = GOOD.replace("t = 1.0", f't = "{expr}"')
    expected = (f"JOB: [params] t must be an expression that is defined at every grid point; "
                f"got '{expr}'. At grid point 0: {detail}.")
    assert check_bad(tmp_path, text) == expected
    assert run_bad(tmp_path, text) == expected


def test_expression_undefined_at_some_grid_points(tmp_path):
    # m runs over -1, 0, 1: sqrt(m) is undefined at the first point, 1/m at the middle one.
    assert check_bad(tmp_path, GOOD.replace("t = 1.0", 't = "1 + sqrt(m)"')) == (
        "JOB: [params] t must be an expression that is defined at every grid point; "
        "got '1 + sqrt(m)'. At grid point 0: sqrt(-1) is not a real number.")
    assert check_bad(tmp_path, GOOD.replace("t = 1.0", 't = "1/m"')) == (
        "JOB: [params] t must be an expression that is defined at every grid point; "
        "got '1/m'. At grid point 1: 1 / 0 divides by zero.")


def test_undefined_model_coefficient_and_drive_expression(tmp_path):
    msg = check_bad(tmp_path, CUSTOM.replace('coeff = "1j*v"', 'coeff = "log(v - 0.5)"'))
    assert msg == ("JOB: [model.onsite.1] coeff must be an expression that is defined at every "
                   "grid point; got 'log(v - 0.5)'. At grid point 0: log(0) is not a finite "
                   "number.")
    driven = GOOD.replace("[measure.gap]", "[measure.quasienergy_gaps]") + (
        '[drive]\nkind = "steps"\nperiod = "1/arccos(m)"\n[[drive.step]]\nspan = 0.5\n'
        '[[drive.step]]\nspan = 0.5\n')
    assert check_bad(tmp_path, driven) == (
        "JOB: [drive] period must be an expression that is defined at every grid point; "
        "got '1/arccos(m)'. At grid point 2: 1 / 0 divides by zero.")


def test_undefined_constant_is_refused(tmp_path):
    msg = check_bad(tmp_path, GOOD.replace("start = -1.0", 'start = "-sqrt(-1)"'))
    assert msg == ("JOB: [sweep.m] start must be a number or an expression of constants such as "
                   "\"pi/2\"; got '-sqrt(-1)'. sqrt(-1) is not a real number.")


def test_complex_literals_keep_complex_functions():
    # Complex values come only from literals such as 1j; then numpy's principal branches apply.
    from sweepcli.expressions import parse
    assert parse("sqrt(-1 + 0j)")({}) == 1j
    assert parse("exp(1j*pi)")({}) == pytest.approx(-1)


# ---------------------------------------------------------------------------------------------
# Inputs that ended in a traceback (or exhausted memory): refused at load, naming table and key


def test_grid_too_large_is_refused_before_allocating(tmp_path):
    # 1000 x 10^6 = 10^9 points: counted from num, nothing of that size is ever allocated.
    text = GOOD.replace("t = 1.0\n", "").replace(
        "num = 3 }", "num = 1000 }\nt = { start = 0.5, stop = 1.0, num = 1000000 }")
    assert run_bad(tmp_path, text) == (
        "JOB: [sweep] must give a grid of at most 10,000,000 points; got 1000 (m) x 1000000 (t) "
        "= 1,000,000,000 points.")
    assert run_bad(tmp_path, GOOD.replace("num = 3 }", "num = 1000000000 }")) == (
        "JOB: [sweep.m] num must be at most 10,000,000 points; got 1000000000.")


def test_refined_grid_too_large_is_refused(tmp_path):
    text = GOOD.replace("num = 3 }", "num = 5000 }\nt = { start = 0.5, stop = 1.0, num = 500 }")
    text = text.replace("t = 1.0\n", "").replace("[measure.gap]", "[measure.chern]\n[refine]\n"
                                                  "by = \"chern\"\ndepth = 3")
    msg = run_bad(tmp_path, text)
    assert msg.startswith("JOB: [refine] depth must be such that the refined grid has at most "
                          "10,000,000 points; got 3. It would have 39993 x 3993 =")


def test_deeply_nested_arrays_are_refused(tmp_path):
    # 3000 levels overflow the TOML parser's recursion; 40 levels parse but are refused.
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", "t = " + "[" * 3000 + "]" * 3000))
    assert msg == ("JOB:7:5: invalid TOML: arrays or tables must be nested at most 32 levels "
                   "deep; these are nested deeper.")
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", "t = " + "[" * 40 + "]" * 40))
    assert msg == ("JOB: [params] t must be nested at most 32 levels deep; got deeper arrays or "
                   "tables.")


def test_overlong_expression_is_refused(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", 't = "' + "1+" * 5000 + '1"'))
    assert msg.startswith("JOB: [params] t must be a number or an arithmetic expression; got '1+")
    assert msg.endswith("... (10,001 characters). It has 10,001 characters; an expression may "
                        "have at most 1000.")
    # Short enough, but 301 operators deep: refused before the evaluator could recurse.
    msg = run_bad(tmp_path, GOOD.replace("t = 1.0", 't = "' + "1+" * 300 + '1"'))
    assert msg.endswith("It is nested too deeply; an expression may have at most 60 levels of "
                        "operators and parentheses.")


def test_model_name_that_is_not_a_string(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace('name = "qwz"', "name = []"))
    assert msg.startswith("JOB: [model] name must be a built-in model or \"custom\"")
    assert msg.endswith("got [].")


@pytest.mark.parametrize("where, text", [
    ("[job] title", '[job]\ntitle = "a\\u0000b"\nname = "small"'),
    ("[params] t", '[params]\nt = "1\\u0000"'),
    ("[output] path", '[output]\npath = "OUT\\u0000"'),
])
def test_nul_character_is_refused_at_load(tmp_path, where, text):
    table = text.split("\n")[0]
    start = GOOD.index(table)
    end = GOOD.index("\n", GOOD.index("\n", start) + 1)
    job = GOOD[:start] + text + GOOD[end:]
    if table == "[job]":
        job = job.replace('\nname = "small"\nname = "small"', '\nname = "small"')
    assert run_bad(tmp_path, job) == (f"JOB: {where} must be a string without NUL characters; "
                                      "got one with a NUL (\\u0000) character.")


def test_output_through_a_file_is_refused(tmp_path):
    (tmp_path / "afile").write_text("")
    job = tmp_path / "job.toml"
    job.write_text(GOOD.replace("OUT", str(tmp_path / "afile" / "out.h5")))
    result = CliRunner().invoke(app, ["run", str(job)])
    assert result.exit_code == 2
    assert result.stderr == (f"error: {job}: [output] path must give a file path that can be "
                             f"created; got '{tmp_path}/afile/out.h5'. '{tmp_path}/afile' is a "
                             "file, not a directory.\n")
    result = CliRunner().invoke(app, ["run", str(job), "-o", str(tmp_path / "afile" / "o.h5")])
    assert result.exit_code == 2
    assert result.stderr.startswith("error: --output must be a file path that can be created; ")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["afile", "job.toml"]


def test_output_name_too_long_is_refused(tmp_path):
    msg = run_bad(tmp_path, GOOD.replace("OUT", str(tmp_path / ("x" * 300 + ".h5"))))
    assert msg.startswith("JOB: [output] path must be a file path that can be created; got ")
    assert msg.endswith("has 303 bytes; a file name may have at most 250 (the run adds '.lock' "
                        "to it).")
    assert list(tmp_path.iterdir()) == [tmp_path / "bad.toml"]


def test_output_option_with_nul_is_refused(tmp_path):
    # The command line refuses a NUL in -o itself (click); the session refuses it as well.
    from sweepcli.errors import SweepError
    from sweepcli.run.session import RunSession

    job = tmp_path / "job.toml"
    job.write_text(GOOD.replace("OUT", str(tmp_path / "out.h5")))
    result = CliRunner().invoke(app, ["run", str(job), "-o", str(tmp_path / "o\x00.h5")])
    assert result.exit_code == 2 and "Traceback" not in result.output
    with pytest.raises(SweepError, match="It contains a NUL character.$"):
        RunSession(job, output=tmp_path / "o\x00.h5", progress=False).run()
    assert list(tmp_path.iterdir()) == [job]


DRIVEN = GOOD.replace("[measure.gap]", "[measure.quasienergy_gaps]") + (
    '[drive]\nkind = "steps"\nperiod = 1.0\n[[drive.step]]\nspan = 0.5\nset = { m = "VALUE" }\n'
    '[[drive.step]]\nspan = 0.5\n')


@pytest.mark.parametrize("value", ["2**70", "1e308", "-2**70*m", "1e13*(m + 2)"])
def test_absurd_drive_values_are_refused_at_load(tmp_path, value):
    # A drive value of 2**70 ran, every point failed (or kept no significant digit of the
    # other terms) and the run exited 0.
    msg = run_bad(tmp_path, DRIVEN.replace("VALUE", value))
    assert msg.startswith(f"JOB: [drive.step.0.set] m must be an expression of magnitude at most "
                          f"1e+12; got '{value}'. It evaluates to "), msg
    assert msg.endswith("Larger values overflow or leave the other terms no significant digits.")


def test_absurd_custom_coefficients_are_refused_at_load(tmp_path):
    hermitian = CUSTOM.replace('coeff = "1j*v"', 'coeff = "0"')
    msg = run_bad(tmp_path, hermitian.replace('coeff = "w"', 'coeff = "w * 2**70"'))
    assert msg.startswith("JOB: [model.hopping.0] coeff must be an expression of magnitude at "
                          "most 1e+12; got 'w * 2**70'. It evaluates to 1.18059e+21"), msg
    # A coefficient is also checked with the values a drive step sets.
    driven = (hermitian.replace("[measure.gap]", "[measure.quasienergy_gaps]")
              + '[drive]\nkind = "steps"\nperiod = 1.0\n[[drive.step]]\nspan = 0.5\n'
                'set = { w = 1e12 }\n[[drive.step]]\nspan = 0.5\n')
    msg = run_bad(tmp_path, driven.replace('coeff = "w"', 'coeff = "10 * w"'))
    assert msg.startswith("JOB: [model.hopping.0] coeff must be an expression of magnitude at "
                          "most 1e+12; got '10 * w'. It evaluates to 1e+13"), msg


def test_harmonic_term_param_of_another_type(tmp_path):
    # A list as [[drive.term]] param ended in "TypeError: unhashable type" (found by fuzzing).
    driven = GOOD.replace("[measure.gap]", "[measure.quasienergy_gaps]") + (
        '[drive]\nkind = "harmonic"\nperiod = 1.0\n[[drive.term]]\nparam = [1, "a"]\n'
        'amplitude = 0.5\n')
    assert run_bad(tmp_path, driven) == ("JOB: [drive.term.0] param must be a model parameter "
                                         "(m, t); got [1, 'a'].")
