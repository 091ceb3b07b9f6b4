"""The fuzzers, with a fixed CI budget: mutated rig files and manifests end in an accepted
project whose every row is accounted for, or in a user error that names where (see fuzzing.py).

Derandomized, so a CI run is repeatable; ``DOSSIER_FUZZ_EXAMPLES`` raises the budget for a longer
local run (``python tests/fuzz_long.py`` runs 10 000 cases each and prints the counts).
"""

import os

import fuzzing as F
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

BUDGET = int(os.environ.get("DOSSIER_FUZZ_EXAMPLES", "120"))
FUZZ = settings(
    max_examples=BUDGET, deadline=None, derandomize=True, database=None, suppress_health_check=list(HealthCheck)
)

rig_case = st.tuples(
    st.sampled_from(F.RIG_MUTATIONS),
    st.integers(0, 10**6),
    st.integers(0, 10),
    st.text(max_size=12),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([(".", ","), (",", ";")]),
)
manifest_value = st.one_of(
    st.sampled_from(F.TARGETED),
    st.none(),
    st.booleans(),
    st.integers(),
    st.floats(),
    st.text(max_size=40),
    st.lists(st.integers(0, 9), max_size=3),
    st.dictionaries(st.sampled_from(["value", "unit", "x"]), st.one_of(st.integers(), st.text(max_size=4)), max_size=2),
)
manifest_case = st.tuples(
    st.sampled_from(["set", "set", "set", "delete", "add", "nest"]), st.sampled_from(F.MANIFEST_PATHS), manifest_value
)


def run_rig_case(root, case):
    kind, line, column, text, number, (decimal, delimiter) = case
    data, where = F.mutate_rig(
        F.base_rig_lines(decimal, delimiter), kind, line, column, text, number, decimal, delimiter
    )
    return F.check_rig_case(root, data, where, decimal, delimiter)


@pytest.fixture(scope="module")
def scratch(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


@FUZZ
@given(case=rig_case)
def test_a_mutated_rig_file_is_read_as_written_or_refused_with_its_line(scratch, case):
    outcome = run_rig_case(scratch / "rig-case", case)
    assert outcome.ok, f"{case}: {outcome.kind}: {outcome.detail}"


@FUZZ
@given(case=manifest_case)
def test_a_mutated_manifest_loads_or_names_the_key_that_was_mutated(scratch, case):
    outcome = F.check_manifest_case(scratch / "manifest-case", *case)
    assert outcome.ok, f"{case}: {outcome.kind}: {outcome.detail}"


def test_the_oracle_sees_damage_that_a_reader_lets_through(scratch, monkeypatch):
    # the property can fail: a reader that drops a row without a word, or reads a cell as another
    # value, is caught
    import dataclasses

    import numpy as np

    real = F.parse_run

    def dropping(raw, spec):
        run = real(raw, spec)
        keep = np.arange(run.line_numbers.size) != 10
        return dataclasses.replace(
            run, channels={k: v[keep] for k, v in run.channels.items()}, line_numbers=run.line_numbers[keep]
        )

    def misreading(raw, spec):
        run = real(raw, spec)
        fz = np.array(run.channels["fz"])
        fz[10] += 1.0
        return dataclasses.replace(run, channels={**run.channels, "fz": fz})

    data = ("\n".join(F.base_rig_lines()) + "\n").encode()
    for reader, kind in ((dropping, "neither read nor reported"), (misreading, "written")):
        monkeypatch.setattr(F, "parse_run", reader)
        outcome = F.check_rig_case(scratch / "oracle", data, None)
        assert outcome.kind == F.SILENT and kind in outcome.detail, outcome
