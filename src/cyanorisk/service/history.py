"""A site's previous report, read from the store, as 'what changed' compares with it (the
history pages are :mod:`cyanorisk.report.overview`)."""

from __future__ import annotations

from cyanorisk.errors import StoreError
from cyanorisk.forecast import Previous
from cyanorisk.report.document import read_document
from cyanorisk.service.store import IssuedReport, Store


def as_previous(report: IssuedReport | None) -> Previous | None:
    """An issued report as the 'what changed' comparison needs it (its JSON document gives its
    last sample)."""
    if report is None:
        return None
    last = None
    doc = read_document(report.paths)
    if doc is not None:
        try:
            last = doc["observed"].get("last_sampled_at_utc")
        except (KeyError, TypeError, AttributeError):  # a document of another shape
            last = None
    return Previous(report.as_of, report.status, report.level, report.probabilities or None, last)


def previous_report(store: Store, site_id: str, as_of: str) -> Previous | None:
    """The report issued before ``as_of`` (the latest revision of the latest earlier day)."""
    return as_previous(store.latest_report(site_id, before=as_of))


def previous_from(url: str, site_id: str, as_of: str) -> Previous | None:
    """:func:`previous_report` from a store URL, reading only; None where no store exists."""
    try:
        with Store(url, create=False) as store:
            return previous_report(store, site_id, as_of)
    except StoreError:
        return None
