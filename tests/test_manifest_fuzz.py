"""Any manifest either loads or fails with one ManifestError listing located problems."""

import tomllib

import projects as P
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from dossier.common.errors import ManifestError
from dossier.project.load import parse_manifest

BASE = tomllib.loads(P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [2000, 4000]))

scalars = st.one_of(
    st.none(), st.booleans(), st.integers(-(10**6), 10**6), st.floats(allow_nan=True), st.text(max_size=12)
)
values = st.recursive(
    scalars.filter(lambda v: v is not None),
    lambda inner: st.one_of(st.lists(inner, max_size=3), st.dictionaries(st.text(max_size=8), inner, max_size=3)),
    max_leaves=8,
)


def _paths(doc, prefix=()):
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield prefix + (k,)
            yield from _paths(v, prefix + (k,))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield prefix + (i,)
            yield from _paths(v, prefix + (i,))


ALL_PATHS = list(_paths(BASE))


@settings(
    max_examples=200, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(edits=st.lists(st.tuples(st.sampled_from(ALL_PATHS), values), max_size=4))
def test_mutated_manifests_load_or_fail_cleanly(tmp_path, edits):
    (tmp_path / "rig").mkdir(exist_ok=True)
    (tmp_path / "rig/a.csv").write_text("x\n", encoding="utf-8")
    doc = tomllib.loads(P.MANIFEST_HEAD + P.specimen_block("A") + P.run_block("A", "rig/a.csv", [2000, 4000]))
    for path, value in edits:
        node = doc
        try:
            for key in path[:-1]:
                node = node[key]
            node[path[-1]] = value
        except (KeyError, IndexError, TypeError):
            continue
    try:
        parse_manifest(doc, tmp_path)
    except ManifestError as exc:
        assert exc.problems
        for problem in exc.problems:
            assert problem.location and problem.message
