"""`mmsverify estimate` and the heat-spreader solution-verification demo."""

import json

import pytest

from mmsverify.cli import main
from mmsverify.analysis.estimate import assess

from _helpers import write_profiles


def test_values_on_the_command_line_reproduce_celik_column_1(capsys, tmp_path):
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 1 (levels listed fine first)
    out = tmp_path / "e.json"
    rc = main(["estimate", "--values", "6.063,5.972,5.863", "--cells", "18000,8000,4500", "--dim", "2",
               "--name", "phi", "--json", str(out)])
    text = capsys.readouterr().out
    assert rc == 0
    assert "observed order               1.53" in text
    assert "extrapolated value           6.168" in text
    d = json.loads(out.read_text())[0]
    assert round(d["extrapolated"], 4) == 6.1685 and d["convergence"] == "monotone"


def test_oscillatory_column_gets_the_gci_with_a_caution(capsys):
    # Celik et al. 2008, Table 1, column 3: oscillatory convergence, GCI_fine21 = 0.5 % given with a caution
    rc = main(["estimate", "--values", "6.0042,5.9624,6.0909", "--cells", "18000,4500,980", "--dim", "2"])
    text = capsys.readouterr().out
    assert "oscillatory" in text and "caution" in text
    assert rc == 0


def test_level_file(tmp_path, capsys):
    f = tmp_path / "levels.csv"
    # Celik et al. 2008, Table 1, columns 1 (as "lift") with the cells of column 1
    f.write_text("dim = 2\ncells, lift\n4500, 5.863\n8000, 5.972\n18000, 6.063\n")
    assert main(["estimate", str(f)]) == 0
    assert "lift" in capsys.readouterr().out


def test_profile_from_three_files(tmp_path, capsys):
    # closed form: phi(x; h) = sin(x) + h**2 cos(3x) converges at order 2 pointwise
    cells = [10, 20, 40]
    files = write_profiles(tmp_path, cells, prefix="p")
    png = tmp_path / "prof.png"
    rc = main(["estimate", "--profile", *files, "--cells", ",".join(map(str, cells)), "--dim", "1",
               "--volume", "2", "--column", "u", "--plot", str(png)])
    assert rc == 0 and png.stat().st_size > 1000
    assert "average apparent order" in capsys.readouterr().out.lower()


@pytest.mark.parametrize("argv,words", [
    (["estimate"], "give a level file"),
    (["estimate", "--values", "1,2,3"], "--h or the cell counts"),
    (["estimate", "--values", "1,2", "--h", "0.1,0.05,0.025"], "one size per value"),
    (["estimate", "--values", "1,a,3", "--h", "1,2,3"], "expected numbers"),
    (["estimate", "--values", "1,1,1", "--h", "0.4,0.2,0.1"], ""),
])
def test_bad_input_is_a_clear_error(argv, words, capsys):
    rc = main(argv)
    err = capsys.readouterr()
    assert rc in (1, 2)
    assert words in err.err + err.out
    assert "nan" not in (err.err + err.out).lower()


def test_heat_spreader_demo_is_second_order_and_conserves_heat():
    from solvers_demo.spreader import CHIP, LX, POWER, run
    rows = run((16, 32, 64))
    cells = [r["cells"] for r in rows]
    a = assess([r["chip_centre_T"] for r in rows], cells=cells, dim=2, volume=0.04 * 0.03, formal_order=2)
    # LeVeque 2007, sec. 3.2: second-order 5-point scheme
    assert a.convergence.kind == "monotone" and abs(a.order - 2) < 0.35
    assert a.acceptable
    # common practice (energy balance): with insulated long edges the heat reaching the right
    # rail is POWER * x_chip / LX for a source symmetric about x_chip
    assert rows[-1]["right_rail_W"] == pytest.approx(POWER * CHIP[0] / LX, rel=1e-6)


def test_cli_messages_name_the_flags_not_python_keywords(capsys):
    # cell counts without --dim: h = (V/N)^(1/dim) needs the dimension, Celik et al. 2008, Eq. (1)
    assert main(["estimate", "--values", "6.063,5.972,5.863", "--cells", "18000,8000,4500"]) == 2
    err = capsys.readouterr().err
    assert "--dim 1, 2 or 3" in err and "pass dim=" not in err
    # two grids: no observed order, an assumed one is needed, Roache 1998 (GCI with p assumed)  # from memory
    assert main(["estimate", "--values", "5.972,6.063", "--cells", "8000,18000", "--dim", "2"]) == 2
    err = capsys.readouterr().err
    assert "--formal-order" in err and "pass formal_order" not in err
