"""Provenance: where every coefficient and metric came from, as a W3C PROV document (PROV-JSON).

Entities: the manifest and every rig file (with SHA-256), the conditioned curves of every run,
each fitted model, each coefficient, each metric value. Activities: ingest-and-condition per run,
one fit per specimen and channel (with its settings), one metric evaluation per specimen. Agents:
the software (with its version) and the people of the manifest. Relations: used, wasGeneratedBy,
wasDerivedFrom, wasAssociatedWith, wasAttributedTo. Written by hand to the PROV-JSON layout
(W3C Member Submission "PROV-JSON", 2013); the tests read it back with the `prov` package.
"""

from __future__ import annotations

import hashlib
import json
import re

from . import __version__, axes
from .condition import ConditionedRun
from .manifest import MANIFEST_NAME, Manifest
from .metrics import METRICS, MetricValue

NS = "urn:x-dossier:"  # our own namespace for identifiers inside one dossier


def pid(*parts) -> str:
    """A PROV identifier (qualified name in the dossier namespace) from readable parts."""
    return "d:" + "-".join(re.sub(r"[^A-Za-z0-9_.]+", "_", str(p)).strip("_") for p in parts)


def anchor(identifier: str) -> str:
    """The HTML anchor of a provenance entry on the provenance page."""
    return "prov-" + identifier.split(":", 1)[1]


def fit_id(specimen: str, channel: str) -> str:
    return pid("fit", specimen, channel)


def metric_id(specimen: str, metric: str, load_n: float | None = None) -> str:
    return pid("metric", specimen, metric) if load_n is None else pid("metric", specimen, metric, f"{load_n:.0f}N")


def provenance_record(manifest: Manifest, manifest_sha256: str, conditioned: list[ConditionedRun], models,
                      metrics: list[MetricValue]) -> dict:
    """Return the PROV-JSON document of a build as plain data."""
    doc: dict = {"prefix": {"d": NS}, "entity": {}, "activity": {}, "agent": {}, "used": {},
                 "wasGeneratedBy": {}, "wasDerivedFrom": {}, "wasAssociatedWith": {}, "wasAttributedTo": {}}
    n = [0]

    def rel(kind: str, record: dict) -> None:
        n[0] += 1
        doc[kind][f"d:r{n[0]}"] = record

    software = pid("software", "dossier", __version__)
    doc["agent"][software] = {"prov:type": "prov:SoftwareAgent", "prov:label": f"dossier {__version__}"}
    people = []
    for i, name in enumerate(manifest.document.authors):
        people.append(pid("person", name))
        doc["agent"][people[-1]] = {"prov:type": "prov:Person", "prov:label": name, "d:role": "author"}
    for p in manifest.signoff.people:
        ident = pid("person", p.name)
        doc["agent"].setdefault(ident, {"prov:type": "prov:Person", "prov:label": p.name})["d:role"] = p.role

    man = pid("input", MANIFEST_NAME)
    doc["entity"][man] = {"prov:label": MANIFEST_NAME, "d:sha256": manifest_sha256}
    for c in conditioned:
        a = c.account
        spec = manifest.runs[a.run_index]
        f = pid("input", a.source_file)
        doc["entity"][f] = {"prov:label": a.source_file, "d:sha256": a.sha256, "d:lab": spec.lab or "",
                            "d:axis_convention": spec.axis_convention}
        act = pid("conditioning", "run", a.run_index)
        settings = manifest.conditioning.__dict__
        doc["activity"][act] = {"prov:label": f"ingest and condition run {a.run_index}",
                                "d:settings": json.dumps(settings, sort_keys=True),
                                "d:internal_axes": axes.INTERNAL, "d:software": f"dossier {__version__}"}
        cur = pid("conditioned", "run", a.run_index)
        doc["entity"][cur] = {"prov:label": f"conditioned curves of run {a.run_index}",
                              "d:samples_kept": a.n_kept, "d:samples": a.n_samples,
                              "d:operating_points": "; ".join(
                                  f"{p.load_n:.0f} N, {p.camber_deg:g} deg, {p.pressure_kpa:.0f} kPa: lines "
                                  f"{p.first_line}-{p.last_line}" for p in c.points)}
        rel("used", {"prov:activity": act, "prov:entity": f})
        rel("used", {"prov:activity": act, "prov:entity": man})
        rel("wasGeneratedBy", {"prov:entity": cur, "prov:activity": act})
        rel("wasDerivedFrom", {"prov:generatedEntity": cur, "prov:usedEntity": f})
        rel("wasAssociatedWith", {"prov:activity": act, "prov:agent": software})

    for m in models:
        for fit in m.channels:
            act = pid("fitting", m.specimen, fit.channel)
            ent = fit_id(m.specimen, fit.channel)
            doc["activity"][act] = {
                "prov:label": f"fit {fit.channel.upper()}0 of {m.specimen}",
                "d:settings": json.dumps({**manifest.fit.__dict__, "fz0_n": fit.fz0_n, "p0_kpa": fit.p0_kpa,
                                          "r0_m": fit.r0_m if fit.channel == "mz" else None}, sort_keys=True),
                "d:software": f"dossier {__version__}"}
            doc["entity"][ent] = {"prov:label": f"fitted {fit.channel.upper()}0 of {m.specimen}",
                                  "d:rmse": fit.statistics.rmse, "d:n_points": fit.statistics.n_points}
            runs = sorted({k[0] for k in fit.source_points})
            for r in runs:
                pts = [k for k in fit.source_points if k[0] == r]
                rel("used", {"prov:activity": act, "prov:entity": pid("conditioned", "run", r),
                             "d:operating_points": "; ".join(f"{k[1]:.0f} N, {k[2]:g} deg, {k[3]:.0f} kPa" for k in pts)})
                rel("wasDerivedFrom", {"prov:generatedEntity": ent, "prov:usedEntity": pid("conditioned", "run", r)})
            if fit.channel == "mz":
                rel("used", {"prov:activity": act, "prov:entity": fit_id(m.specimen, "fy")})
                rel("wasDerivedFrom", {"prov:generatedEntity": ent, "prov:usedEntity": fit_id(m.specimen, "fy")})
            rel("wasGeneratedBy", {"prov:entity": ent, "prov:activity": act})
            rel("wasAssociatedWith", {"prov:activity": act, "prov:agent": software})
            for c in fit.coefficients:
                ce = pid("coefficient", m.specimen, fit.channel, c.name)
                doc["entity"][ce] = {"prov:label": f"{c.name} of {m.specimen}", "prov:value": float(c.value),
                                     "d:status": c.status, "d:stderr": -1.0 if c.stderr is None else float(c.stderr)}
                rel("wasDerivedFrom", {"prov:generatedEntity": ce, "prov:usedEntity": ent})

    for m in models:
        act = pid("metrics", m.specimen)
        doc["activity"][act] = {"prov:label": f"metrics of {m.specimen}", "d:software": f"dossier {__version__}",
                                "d:method": "model evaluation at zero camber and nominal pressure; delta-method intervals"}
        rel("wasAssociatedWith", {"prov:activity": act, "prov:agent": software})
        for ch in {c for d in METRICS.values() for c in d.channels}:
            if getattr(m, ch) is not None:
                rel("used", {"prov:activity": act, "prov:entity": fit_id(m.specimen, ch)})
    for v in metrics:
        me = metric_id(v.specimen, v.metric, v.load_n)
        doc["entity"][me] = {"prov:label": f"{METRICS[v.metric].label} of {v.specimen} at {v.load_n:.0f} N",
                             "prov:value": float(v.value), "d:unit": v.unit}
        rel("wasGeneratedBy", {"prov:entity": me, "prov:activity": pid("metrics", v.specimen)})
        for ch in METRICS[v.metric].channels:
            rel("wasDerivedFrom", {"prov:generatedEntity": me, "prov:usedEntity": fit_id(v.specimen, ch)})

    dossier = pid("dossier", manifest.document.number, manifest.document.revision)
    doc["entity"][dossier] = {"prov:label": f"{manifest.document.number} rev. {manifest.document.revision}",
                              "d:status": manifest.signoff.status}
    for p in people:
        rel("wasAttributedTo", {"prov:entity": dossier, "prov:agent": p})
    return {k: v for k, v in doc.items() if v}


def provenance_bytes(record: dict) -> bytes:
    return (json.dumps(record, indent=1, sort_keys=True, ensure_ascii=False) + "\n").encode("utf-8")


def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()
