"""The ``hte lattice`` subcommand and the lattice drawing: printed summary, exit codes, drawn files."""

from pathlib import Path

import numpy as np
import pytest

from hte.cli import main
from hte.drawing import draw_lattice
from hte.errors import ParameterError
from hte.lattice_file import load_lattice

DATA = Path(__file__).parent / "data" / "lattices"


def rows_of(text: str, header_start: str) -> list[list[str]]:
    """Whitespace-split rows of the table whose header line starts with `header_start`."""
    lines = text.splitlines()
    start = next(k for k, line in enumerate(lines) if line.strip().startswith(header_start))
    rows = []
    for line in lines[start + 1:]:
        if not line.strip():
            break
        rows.append(line.split())
    return rows


def test_square_summary_lists_sites_bonds_lengths_and_coordination(capsys):
    assert main(["lattice", "square"]) == 0
    out = capsys.readouterr().out
    assert "lattice     square" in out
    assert "dimension   2" in out
    assert "sites per cell: 1" in out
    assert rows_of(out, "class     sites") == [["magnetic", "1", "A", "1/2", "1"]]
    # square lattice: 2 J1 bonds per site of length 1 and 2 J2 of length sqrt(2) (common practice)
    assert rows_of(out, "label") == [["J1", "2", "1", "1"], ["J2", "2", "1.41421", "0"]]
    assert rows_of(out, "class     J1") == [["magnetic", "4", "4"]]


def test_kagome_layered_summary_gives_coordination_per_site_class(capsys):
    assert main(["lattice", "kagome-layered"]) == 0
    out = capsys.readouterr().out
    assert rows_of(out, "class       sites") == [["magnetic", "3", "A", "B", "C", "1/2", "1"],
                                                ["interlayer", "1", "X", "1/2", "0"]]
    # interlayer site above a triangle centre: 3 corners below + 3 above, at sqrt(1 + 1/3) (common practice)
    assert rows_of(out, "class       J1") == [["magnetic", "4", "2", "2", "4"], ["interlayer", "0", "6", "0", "0"]]
    assert ["Jd", "6", "1.1547", "0"] in rows_of(out, "label")


def test_lattice_file_given_by_path(capsys):
    assert main(["lattice", str(DATA / "decorated_chain.toml")]) == 0
    out = capsys.readouterr().out
    assert "lattice     decorated-chain" in out
    assert ["Jd", "2", "1.11803", "1"] in rows_of(out, "label")


def test_png_is_written_atomically_and_shows_bonds_in_their_label_colours(tmp_path, capsys):
    from matplotlib.colors import to_rgb
    from matplotlib.image import imread

    target = tmp_path / "ladder.png"
    assert main(["lattice", "ladder", "--png", str(target)]) == 0
    assert f"drawing written to {target}" in capsys.readouterr().out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["ladder.png"]  # no temporary file left
    assert target.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    image = imread(target)[:, :, :3]

    def pixels_near(colour):
        return int(np.sum(np.linalg.norm(image - np.array(to_rgb(colour)), axis=2) < 0.1))

    # legs (J1) are the first label colour, rungs (Jrung) the second; 6 cells of legs and rungs are drawn
    assert pixels_near("tab:blue") > 500
    assert pixels_near("tab:orange") > 500


def test_svg_and_pdf_are_chosen_by_suffix(tmp_path):
    spec = load_lattice("pyrochlore")
    assert draw_lattice(spec, tmp_path / "p.svg").read_text().lstrip().startswith("<?xml")
    assert draw_lattice(spec, tmp_path / "p.pdf", cells=1).read_bytes()[:5] == b"%PDF-"


def test_bad_drawing_suffix_is_exit_code_2_before_any_output(tmp_path, capsys):
    assert main(["lattice", "chain", "--png", str(tmp_path / "chain.jpg")]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    assert 'cannot tell the drawing format from the suffix ".jpg"' in captured.err
    assert "Traceback" not in captured.err
    assert list(tmp_path.iterdir()) == []


def test_missing_output_folder_is_exit_code_2(tmp_path, capsys):
    assert main(["lattice", "chain", "--png", str(tmp_path / "no" / "chain.png")]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_unknown_lattice_is_exit_code_2_with_the_list_of_builtins(capsys):
    assert main(["lattice", "kagom"]) == 2
    err = capsys.readouterr().err
    assert 'unknown lattice "kagom": did you mean "kagome"?' in err
    assert "pyrochlore" in err and "Traceback" not in err


def test_malformed_file_is_exit_code_2_naming_the_file(capsys):
    assert main(["lattice", str(DATA / "unknown_site.toml")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("hte lattice: error: ")
    assert 'unknown_site.toml, [[bonds]] label "J1", pair 5' in err
    assert "Traceback" not in err


def test_bad_cell_count_is_a_parameter_error(tmp_path):
    with pytest.raises(ParameterError, match=r"cells = \(2, 2\): give one integer between 1 and 12, or 3 of them"):
        draw_lattice(load_lattice("cubic"), tmp_path / "c.png", cells=(2, 2))
