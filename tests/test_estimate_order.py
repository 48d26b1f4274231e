"""`mmsverify estimate` with levels or files given fine to coarse: reordered with a
note when the sizes say so, refused (naming the files) when files and sizes disagree."""

import numpy as np
import pytest

from mmsverify.cli import main
from mmsverify.errors import AnalysisError
from mmsverify.analysis.estimate import assess
from mmsverify.analysis.gci import gci_profile

from _helpers import write_profiles

CELLS = (10, 20, 40)  # coarse to fine


def _run(capsys, argv):
    rc = main(argv)
    out = capsys.readouterr()
    return rc, out.out, out.err


def test_profile_files_and_sizes_both_fine_first_are_reordered_with_a_note(tmp_path, capsys):
    files = write_profiles(tmp_path, CELLS)
    base = ["--dim", "1", "--volume", "2", "--column", "u"]
    rc0, ref, _ = _run(capsys, ["estimate", "--profile", *files, "--cells", "10,20,40", *base])
    rc, out, _ = _run(capsys, ["estimate", "--profile", *files[::-1], "--cells", "40,20,10", *base])
    assert rc0 == rc == 0
    assert out.startswith("note:") and "fine to coarse" in out and files[0] in out
    assert out.split("\n", 1)[1] == ref  # the same result as given coarse to fine


def test_profile_files_fine_first_with_sizes_coarse_first_are_refused(tmp_path, capsys):
    files = write_profiles(tmp_path, CELLS)
    rc, out, err = _run(capsys, ["estimate", "--profile", *files[::-1], "--cells", "10,20,40", "--dim", "1",
                                 "--volume", "2", "--column", "u"])
    assert rc == 2 and out == ""
    assert files[2] in err and "41 points" in err and "coarse, medium, fine" in err


def test_profile_files_coarse_first_with_sizes_fine_first_are_refused(tmp_path, capsys):
    files = write_profiles(tmp_path, CELLS)
    rc, _, err = _run(capsys, ["estimate", "--profile", *files, "--cells", "40,20,10", "--dim", "1",
                               "--volume", "2", "--column", "u"])
    assert rc == 2 and files[0] in err and "same order" in err


def test_gci_profile_refuses_point_sets_fine_first():
    # closed form: linear profile, point sets reversed but sizes coarse to fine
    x = [np.linspace(0, 1, n) for n in (41, 21, 11)]
    with pytest.raises(AnalysisError, match="fine to coarse"):
        gci_profile(x, [1 + xi for xi in x], h=[0.1, 0.05, 0.025])


def test_values_fine_first_get_a_note(capsys):
    # Celik et al. 2008, J. Fluids Eng. 130:078001, Table 1, column 1 (listed fine first, as the paper does)
    rc, out, _ = _run(capsys, ["estimate", "--values", "6.063,5.972,5.863", "--cells", "18000,8000,4500",
                               "--dim", "2"])
    assert rc == 0 and out.startswith("note:") and "fine to coarse" in out
    assert "observed order               1.53" in out  # Table 1, column 1: p = 1.53
    rc, out, _ = _run(capsys, ["estimate", "--values", "5.863,5.972,6.063", "--cells", "4500,8000,18000",
                               "--dim", "2"])
    assert rc == 0 and "note:" not in out


def test_level_file_fine_first_gets_a_note(tmp_path, capsys):
    f = tmp_path / "levels.csv"
    # Celik et al. 2008, Table 1, column 1, rows fine first
    f.write_text("dim = 2\ncells, lift\n18000, 6.063\n8000, 5.972\n4500, 5.863\n")
    rc, out, _ = _run(capsys, ["estimate", str(f)])
    assert rc == 0 and out.startswith(f"note: {f} lists the levels fine to coarse")


def test_python_api_names_the_reversed_order():
    # Celik et al. 2008, Table 1, column 1, passed fine first to assess
    with pytest.raises(AnalysisError, match="listed fine to coarse"):
        assess([6.063, 5.972, 5.863], cells=[18000, 8000, 4500], dim=2)
