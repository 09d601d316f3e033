"""Notice and snapshot records -> placed, closed intervals (private steps of
:func:`impactlink.link.notices.link_notices`)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from impactlink.link._common import (
    Ledger,
    LinkError,
    OpenNoticeWarning,
)
from impactlink.link._keys import forms, norm_lookup, normalise_key
from impactlink.link.spatial import points_to_counties
from impactlink.schema import COUNTY

DEFAULT_CAUSES = ("drought", "dry", "low flow", "low_flow", "water shortage", "shortage")


# --------------------------------------------------------------------------- preparation
def _regions(counties) -> pd.Series:
    ids = counties[COUNTY].astype(str).to_numpy()
    if "region" in counties.columns:
        return pd.Series(counties["region"].astype(str).to_numpy(), index=ids)
    return pd.Series("all", index=ids)


def _horizons(opts, name) -> list[int]:
    h = opts.get("horizon_weeks", (4, 13))
    h = [h] if isinstance(h, int) else list(h)
    if not h or any(int(x) < 1 for x in h):
        raise LinkError(f"[impacts.{name}] horizon_weeks must be positive integers, got {h}")
    return sorted({int(x) for x in h})


def _place(frame: pd.DataFrame, *, counties, tables, crs, issuer_county=None) -> np.ndarray:
    """County of each row: county_id, else lon/lat, else the issuer's water system, else the
    county the same issuer's notices were placed in."""
    n = len(frame)
    out = np.full(n, None, dtype=object)
    known = set(counties[COUNTY].astype(str))
    if COUNTY in frame.columns:
        c = frame[COUNTY]
        has = c.notna().to_numpy()
        out[has] = c[has].astype(str).to_numpy()
    todo = pd.isna(out)
    if todo.any() and {"lon", "lat"} <= set(frame.columns):
        sub = frame.loc[todo]
        out[todo] = points_to_counties(sub["lon"].to_numpy(float), sub["lat"].to_numpy(float),
                                       counties, crs=crs)
    todo = pd.isna(out)
    ws = tables.get("water_systems")
    if todo.any() and ws is not None and len(ws) and "issuer" in frame.columns:
        wsc = np.full(len(ws), None, dtype=object)
        if COUNTY in ws.columns:
            has = ws[COUNTY].notna().to_numpy()
            wsc[has] = ws.loc[has, COUNTY].astype(str).to_numpy()
        rest = pd.isna(wsc)
        if rest.any():
            wsc[rest] = points_to_counties(ws.loc[rest, "lon"].to_numpy(float),
                                           ws.loc[rest, "lat"].to_numpy(float), counties, crs=crs)
        # issuer matched to system ids and names by normal form (see link._keys)
        lookup = norm_lookup(ws["system_id"].astype(str), wsc)
        if "system_name" in ws.columns:
            lookup.update({k: v for k, v in norm_lookup(ws["system_name"], wsc).items()
                           if k not in lookup})
        out[todo] = forms(frame.loc[todo, "issuer"].astype(str)).map(lookup).to_numpy()
    todo = pd.isna(out)
    if todo.any() and issuer_county is not None:
        out[todo] = forms(frame.loc[todo, "issuer"].astype(str)).map(issuer_county).to_numpy()
    unknown = ~pd.isna(out) & ~np.isin(out.astype(str), list(known))
    out[unknown] = "?" + out[unknown].astype(str)
    return out


def _place_or_reject(frame: pd.DataFrame, table: str, ledger: Ledger, ok: np.ndarray, *,
                     reason: str, column: str, **place) -> np.ndarray:
    """County of each row (:func:`_place` with ``place``). Rows still ``ok`` that cannot be
    placed are rejected with ``reason`` (naming ``column``), and rows placed in a county
    missing from the counties layer are rejected too; both are cleared from ``ok`` in place."""
    county = _place(frame, **place)
    unplaced = pd.isna(county)
    ledger.reject(table, frame, unplaced & ok, reason, column=column)
    ok &= ~unplaced
    unknown = np.array([isinstance(c, str) and c.startswith("?") for c in county])
    ledger.reject(table, frame, unknown & ok, "county_id not in the counties layer",
                  column=COUNTY)
    ok &= ~unknown
    return county


def _prepare_notices(nt: pd.DataFrame, ledger: Ledger, *, opts, K, counties, tables, crs
                     ) -> pd.DataFrame:
    ok = np.ones(len(nt), dtype=bool)
    if "cause" in nt.columns:
        # causes matched by normal form (case, surrounding space, Unicode; see link._keys)
        causes = {normalise_key(str(c)) for c in opts.get("drought_causes", DEFAULT_CAUSES)}
        cause = forms(nt["cause"])
        non = (cause.notna() & (cause != "") & ~cause.isin(causes)).to_numpy(dtype=bool)
        ledger.reject("notices", nt, non & ok,
                      "cause is not drought (see option drought_causes)", column="cause")
        ok &= ~non
    lvl = pd.to_numeric(nt["level"], errors="coerce")
    bad = (lvl.isna() | (lvl < 0) | (lvl > K)).to_numpy()
    ledger.reject("notices", nt, bad & ok, f"level outside 0..{K} (the ladder)", column="level")
    ok &= ~bad
    start = pd.to_datetime(nt["start_date"])
    end = pd.to_datetime(nt["end_date"]) if "end_date" in nt.columns else pd.Series(
        pd.NaT, index=nt.index)
    bad = (end.notna() & (end < start)).to_numpy()
    ledger.reject("notices", nt, bad & ok, "end_date is before start_date", column="end_date")
    ok &= ~bad
    bad = start.isna().to_numpy()
    ledger.reject("notices", nt, bad & ok, "start_date is missing", column="start_date")
    ok &= ~bad
    county = _place_or_reject(
        nt, "notices", ledger, ok, column="notice_id",
        reason="cannot place notice: no county_id, lon/lat outside every county, and issuer "
               "not in water_systems",
        counties=counties, tables=tables, crs=crs)
    return pd.DataFrame({
        "table": "notices",
        "row": nt.index[ok],
        "issuer": forms(nt["issuer"].astype(str)).to_numpy()[ok],
        COUNTY: county[ok].astype(str),
        "start_date": start.to_numpy()[ok],
        "end_date": end.to_numpy()[ok],
        "level": lvl.to_numpy()[ok].astype(np.int64),
        "n_records": 1,
    })


def _snapshots_to_intervals(sn: pd.DataFrame, ledger: Ledger, *, opts, K, counties, tables, crs
                            ) -> pd.DataFrame:
    """Rebuild intervals from snapshot lists: each snapshot's stage holds until the issuer's
    next snapshot (at most ``snapshot_hold_weeks``); stage 0 means none in force."""
    hold = pd.Timedelta(weeks=int(opts.get("snapshot_hold_weeks", 8)))
    ok = np.ones(len(sn), dtype=bool)
    stage = pd.to_numeric(sn["stage"], errors="coerce")
    bad = (stage.isna() | (stage < 0) | (stage > K)).to_numpy()
    ledger.reject("notice_snapshots", sn, bad, f"stage outside 0..{K} (the ladder)",
                  column="stage")
    ok &= ~bad
    issuer_county = None
    nt = tables.get("notices")
    if nt is not None and COUNTY in nt.columns and len(nt):
        g = nt.dropna(subset=[COUNTY])
        issuer_county = g.groupby(forms(g["issuer"].astype(str)).to_numpy())[COUNTY].agg(
            lambda s: str(s.astype(str).mode().iloc[0]))
    county = _place_or_reject(
        sn, "notice_snapshots", ledger, ok, column="issuer",
        reason="cannot place snapshot: no county_id or lon/lat, and issuer not in "
               "water_systems or notices",
        counties=counties, tables=tables, crs=crs, issuer_county=issuer_county)
    d = pd.DataFrame({
        "row": sn.index[ok], "issuer": forms(sn["issuer"].astype(str)).to_numpy()[ok],
        COUNTY: county[ok].astype(str),
        "date": pd.to_datetime(sn["date"]).to_numpy()[ok],
        "level": stage.to_numpy()[ok].astype(np.int64),
    }).sort_values(["issuer", COUNTY, "date"], kind="stable")
    nxt = d.groupby(["issuer", COUNTY])["date"].shift(-1)
    limit = d["date"] + hold
    end = nxt.where(nxt.notna() & (nxt <= limit), limit) - pd.Timedelta(days=1)
    gaps = int((nxt.notna() & (nxt > limit)).sum())
    if gaps:
        ledger.warn(f"[impacts.{ledger.impact}] {gaps} snapshot(s) were followed by a gap longer "
                    f"than snapshot_hold_weeks; their stage was held for that many weeks only")
    return pd.DataFrame({
        "table": "notice_snapshots", "row": d["row"].to_numpy(),
        "issuer": d["issuer"].to_numpy(), COUNTY: d[COUNTY].to_numpy(),
        "start_date": d["date"].to_numpy(), "end_date": end.to_numpy(),
        "level": d["level"].to_numpy(), "n_records": 1,
    })


def _close_open(iv: pd.DataFrame, *, record_end, cap, supersede: bool, ledger: Ledger
                ) -> pd.DataFrame:
    iv = iv.sort_values(["issuer", COUNTY, "start_date", "row"], kind="stable").reset_index(
        drop=True)
    is_open = iv["end_date"].isna().to_numpy()
    end = iv["end_date"].copy()
    if supersede:
        nxt = iv.groupby(["issuer", COUNTY])["start_date"].shift(-1)
        sup = is_open & nxt.notna().to_numpy()
        cand = nxt - pd.Timedelta(days=1)
        cand = cand.where(cand >= iv["start_date"], iv["start_date"])
        end[sup] = cand[sup]
    still = end.isna().to_numpy() & (iv["level"].to_numpy() >= 1)
    if cap is not None:
        capped = iv["start_date"] + pd.Timedelta(weeks=int(cap)) - pd.Timedelta(days=1)
        fill = capped.where(capped < record_end, record_end)
    else:
        fill = pd.Series(record_end, index=iv.index)
    end[still] = fill[still]
    end[end.isna()] = iv.loc[end.isna(), "start_date"]  # level-0 lifts: a single day
    iv["end_date"] = pd.to_datetime(end)
    iv["open_end"] = still
    n = int(still.sum())
    if n:
        where = f"at most {cap} weeks" if cap is not None else "the end of the record"
        ledger.warn(f"[impacts.{ledger.impact}] {n} notice(s) have no end date and no later "
                    f"notice from their issuer; kept in force to {where} (column open_end)",
                    OpenNoticeWarning)
    return iv


def _rejected_only_counts(ledger: Ledger, iv, notices, snaps) -> dict[str, int]:
    rej = ledger.rejected()
    return {t: int((rej["table"] == t).sum()) for t in ("notices", "notice_snapshots")
            if (rej["table"] == t).any()}


