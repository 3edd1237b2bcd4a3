"""Running a study on Dask: the same files as a local run, resume, and a one-line error."""
import pytest

from heschl import batch
from heschl.errors import InputDataError
from heschl.outputs import recording_paths
from heschl.inputs import discover


def test_a_local_dask_cluster_redoes_only_what_is_missing_and_writes_the_same_files(study_copy):
    recordings = discover(study_copy)
    target = next(r for r in recordings if r.site == "alder" and r.paradigm == "clicktrain")
    paths = recording_paths(study_copy.output, target)
    before = {name: paths[name].read_bytes() for name in ("features", "qc")}
    paths["provenance"].unlink()  # as after a crash: provenance, written last, is missing
    summaries = batch.run_study(study_copy, jobs=2, cluster="local")
    status = {(s["participant_id"], s["paradigm"]): s["status"] for s in summaries}
    assert status.pop((target.participant_id, "clicktrain")) == "done"
    assert set(status.values()) == {"unchanged"}
    # A pure task: the same inputs give the same bytes on a Dask worker as in a local process.
    assert {name: paths[name].read_bytes() for name in ("features", "qc")} == before
    assert paths["provenance"].exists()


def test_an_unreachable_scheduler_is_a_one_line_error(study_copy, monkeypatch):
    monkeypatch.setattr(batch, "CONNECT_TIMEOUT", "2s")
    with pytest.raises(InputDataError, match=r'cluster: cannot reach the Dask scheduler at "tcp://127.0.0.1:9"'
                                             r" \(.*\); start the scheduler and workers, or check the address"):
        batch.run_study(study_copy, cluster="tcp://127.0.0.1:9")
