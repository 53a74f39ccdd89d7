"""One vocabulary for result objects: ``.summary()``, ``.to_dict()``, ``.to_frame()``, ``_repr_html_``.

Every result a user meets from Python (the recalculated traverse, the zoning
result, a boundary fit, the whole-crystal model, a campaign run) answers the
same four calls:

* ``summary()`` – a few readable lines (the older ``report()`` names stay as
  aliases where they existed);
* ``to_dict()`` – plain, JSON-able content (the files' layout);
* ``to_frame()`` – the tabular part as a pandas DataFrame;
* ``_repr_html_()`` – how a notebook shows it: the summary, then the first
  rows of the table.

The mixins here only add methods; they hold no state and do not change the
classes' fields.
"""

from __future__ import annotations

import html

__all__ = ["ResultVocabulary", "TraverseVocabulary", "FitVocabulary", "ZoningVocabulary", "CrystalVocabulary",
           "RunVocabulary"]

#: Rows of the table shown in a notebook.
HTML_ROWS = 12


class ResultVocabulary:
    """``summary()`` (from ``report()`` where a class has one) and ``_repr_html_``."""

    def summary(self) -> str:
        report = getattr(self, "report", None)
        if callable(report):
            return report()
        return repr(self)

    def to_frame(self):
        raise TypeError(f"{type(self).__name__} has no tabular part")

    def _repr_html_(self) -> str:
        parts = [f"<pre>{html.escape(self.summary())}</pre>"]
        try:
            frame = self.to_frame()
        except TypeError:
            frame = None
        if frame is not None and len(frame.columns):
            more = "" if len(frame) <= HTML_ROWS else f"<p>… {len(frame) - HTML_ROWS} more rows (.to_frame())</p>"
            parts.append(frame.head(HTML_ROWS).to_html(index=False, escape=True, na_rep="") + more)
        return "".join(parts)


class TraverseVocabulary(ResultVocabulary):
    """For :class:`zoneprofile.traverse.Traverse`: the recalculated table is the frame."""

    def summary(self) -> str:
        t = self.table
        lines = [f"{self.sample} / {self.crystal} ({self.mineral}): {len(t)} analyses, "
                 f"{len(t) - self.n_flagged} pass QC, {self.n_flagged} flagged; from {self.source}"]
        if "distance_um" in t and len(t):
            lines.append(f"  distance {t['distance_um'].min():.1f} – {t['distance_um'].max():.1f} µm from the rim"
                         + (f"; spot {self.beam_um:g} µm" if self.beam_um else ""))
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)

    def to_frame(self):
        return self.output_table()

    def to_dict(self) -> dict:
        from zoneprofile._output import to_jsonable

        return to_jsonable({"sample": self.sample, "crystal": self.crystal, "mineral": self.mineral,
                            "source": self.source, "sha256": self.sha256, "beam_um": self.beam_um,
                            "max_offset_um": self.max_offset_um, "notes": list(self.notes),
                            "analyses": self.output_table().to_dict("records")})


class FitVocabulary(ResultVocabulary):
    """For :class:`zoneprofile.diffusion.FitResult`: the measured points with model and residual."""

    def to_frame(self):
        import pandas as pd

        return pd.DataFrame({"distance_um": self.data_distance_um, "value": self.data_value,
                             "model": self.data_model, "residual": self.residuals})


class ZoningVocabulary(ResultVocabulary):
    """For :class:`zoneprofile.zoning.ZoningResult`: per-point table (zone, melt equivalents)."""

    def to_frame(self):
        return self.points_table()


class CrystalVocabulary(ResultVocabulary):
    """For :class:`zoneprofile.diffusion.crystal.CrystalResult`: one row per boundary and element."""

    def to_dict(self) -> dict:
        return self.record

    def to_frame(self):
        import pandas as pd

        rows = []
        for b in self.record.get("boundaries") or []:
            for el, s in {"joint": b.get("age_days") or {}, **(b.get("by_element") or {})}.items():
                rows.append({"boundary": b.get("id"), "position_um": b.get("position_um"), "element": el,
                             "statement": s.get("statement"), "median_days": s.get("median"),
                             "p2_5_days": s.get("p2_5"), "p97_5_days": s.get("p97_5"),
                             "upper_bound_days": s.get("upper_bound"), "lower_bound_days": s.get("lower_bound"),
                             "concordance": (b.get("concordance") or {}).get("status")})
        return pd.DataFrame(rows, columns=["boundary", "position_um", "element", "statement", "median_days",
                                           "p2_5_days", "p97_5_days", "upper_bound_days", "lower_bound_days",
                                           "concordance"])


class RunVocabulary(ResultVocabulary):
    """For :class:`zoneprofile.campaign.RunSummary`: one row per crystal."""

    def summary(self) -> str:
        lines = [self.line()]
        lines += [f"  failed: {label}: {err}" for label, err in self.failed]
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)

    def to_dict(self) -> dict:
        from zoneprofile._output import to_jsonable

        return to_jsonable({"out_dir": str(self.out_dir), "records": self.records, "computed": self.computed,
                            "from_cache": self.from_cache, "failed": [list(f) for f in self.failed],
                            "seconds": self.seconds, "population": self.population, "notes": self.notes})

    # to_frame (one row per crystal) is defined on RunSummary itself, beside the campaign that already
    # depends on the report's tables: the vocabulary module stays below every stage
