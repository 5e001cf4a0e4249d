"""``tally --journal``: a real ``hiplan drive`` run against the fake daemon (its journal as the
drive writes it), tallied; the bins checked against astropy's galactic frame."""
import json
import sys

import numpy as np
import pytest

from drive_plans import NIGHT, block, mjd, survey_doc
from fake_rotator import FakeRotator
from planner.cli import main
from planner.journal import read_journal
from planner.journaltally import CHUNK_S, journal_spectra

# Blocks in the plane as seen from Saltbush Ridge on that night: chosen by sky azimuth and
# elevation; their l, b come from the site's geometry (checked against astropy below).
POSITIONS = [(140.0, 60.0), (142.0, 59.0), (144.0, 58.0)]
MINUTES = 7.5  # not a whole number of CHUNK_S: the last pseudo-spectrum is shorter


@pytest.fixture(scope="module")
def run(tmp_path_factory, school):
    """A driven night: three blocks; the recorder fails on the second."""
    folder = tmp_path_factory.mktemp("drive")
    start = mjd(NIGHT) + 2 / 1440
    blocks = [block(school, f"T{i}", az, el, start + i * (MINUTES + 3) / 1440, MINUTES)
              for i, (az, el) in enumerate(POSITIONS)]
    plan = folder / "plan.json"
    plan.write_text(json.dumps(survey_doc(school, blocks)), encoding="utf-8")
    journal = folder / "night.jsonl"
    fake = FakeRotator(az=140.0, el=60.0)
    try:
        fail_t1 = "import sys; sys.exit(1 if sys.argv[1] == 'T1' else 0)"
        assert main(["drive", str(plan), "--rotator", fake.address, "--site", "saltbush-ridge",
                     "--clock", f"simulated:{NIGHT}", "--speed", "1e5", "--journal", str(journal),
                     "--record", f"{sys.executable} -c \"{fail_t1}\" {{name}}"]) == 0
    finally:
        fake.close()
    return {"folder": folder, "journal": journal, "blocks": blocks}


def test_pseudo_spectra_cover_each_counted_recording(run):
    got = journal_spectra([run["journal"]])
    intervals = read_journal(run["journal"])
    assert [(i.name, i.status) for i in intervals] == [("T0", "ok"), ("T1", "failed"), ("T2", "ok")]
    assert [rec.name for _, rec in got.failed] == ["T1"]
    s = got.spectra
    # 7.5 min in one-minute pieces: 8 spectra per block, the last of 30 s; exposures add up
    assert len(s) == 16 and s.exposure_s.sum() == pytest.approx(2 * MINUTES * 60, abs=1e-6)
    assert np.count_nonzero(s.exposure_s < CHUNK_S) == 2
    # pointed where the journal says: each block's RA/Dec from the plan
    for interval in (intervals[0], intervals[2]):
        rows = s.row == interval.line
        assert np.allclose(s.ra_deg[rows], interval.ra_deg) and np.allclose(s.dec_deg[rows], interval.dec_deg)


def test_tally_of_the_journal_matches_astropy(run, school, tmp_path, capsys):
    from astropy import units as u
    from astropy.coordinates import SkyCoord
    out = tmp_path / "tally.json"
    log = tmp_path / "log.csv"
    assert main(["tally", "--journal", str(run["journal"]), "--site", "saltbush-ridge",
                 "--format", "json", "-o", str(out), "--log-out", str(log)]) == 0
    err = capsys.readouterr().err
    assert "1 failed recording in the journal not counted (7.5 min)" in err
    doc = json.loads(out.read_text())
    # Independent: the blocks' ICRS positions through astropy's galactic frame. A tracked block
    # stays on one sky position, so all its minutes land in one bin (or outside the strip).
    want_bins, outside = {}, 0.0
    for b in (run["blocks"][0], run["blocks"][2]):
        g = SkyCoord(b["ra_deg"] * u.deg, b["dec_deg"] * u.deg, frame="icrs").galactic
        if abs(g.b.deg) <= school.rules.b_max_deg:
            key = int(np.floor(g.l.deg))
            want_bins[key] = want_bins.get(key, 0.0) + MINUTES
        else:
            outside += MINUTES
    assert want_bins, "the test blocks should lie in the strip"
    assert {b["l_bin"]: b["minutes"] for b in doc["bins"]} == pytest.approx(want_bins, abs=1e-6)
    assert doc["rejected"]["outside_strip"]["minutes"] == pytest.approx(outside, abs=1e-6)
    assert [f["name"] for f in doc["journal_failed"]] == ["T1"]
    assert str(run["journal"]) in doc["files"]
    assert log.read_text().count("\n") >= 2


def test_stamp_convention_does_not_move_journal_spectra(run, tmp_path, capsys):
    docs = []
    for stamp in ("start", "end"):
        out = tmp_path / f"{stamp}.json"
        assert main(["tally", "--journal", str(run["journal"]), "--site", "saltbush-ridge",
                     "--stamp", stamp, "--format", "json", "-o", str(out)]) == 0
        docs.append(json.loads(out.read_text())["bins"])
    assert docs[0] == docs[1]


def test_dry_run_journal_and_nothing_given_are_refused(run, school, tmp_path, capsys):
    dry = tmp_path / "dry.jsonl"
    assert main(["drive", str(run["folder"] / "plan.json"), "--dry-run", "--site", "saltbush-ridge",
                 "--clock", f"simulated:{NIGHT}", "--journal", str(dry)]) == 0
    capsys.readouterr()
    assert main(["tally", "--journal", str(dry), "--site", "saltbush-ridge"]) == 2
    err = capsys.readouterr().err
    assert "a dry run's journal" in err and str(dry) in err and len(err.strip().splitlines()) == 1
    assert main(["tally", "--site", "saltbush-ridge"]) == 2
    assert "--journal" in capsys.readouterr().err
    before = run["journal"].read_bytes()
    assert main(["tally", "--journal", str(run["journal"]), "--site", "saltbush-ridge",
                 "-o", str(run["journal"]), "--force"]) == 2
    assert "never replaces an input" in capsys.readouterr().err
    assert run["journal"].read_bytes() == before
