"""Library page: import (with a preview; writes only on request), catalog edits,
provenance, deletion and restore."""

import math

import pandas as pd
import streamlit as st

from dashboard import data, importing
from dashboard.common import MISSING, context, plain
from engine.base.errors import LibraryError

ctx = context()
lib = ctx.library
st.header("Library")
access = "read and write" if lib.can_write else "read only: import, edit and delete are refused"
st.caption(
    f"Library: {plain(lib.display_location)} (version {lib.version()}); connected as "
    f"{plain(lib.role)}, {access}"
)

message = st.session_state.pop("_library_msg", None)
if message:
    st.success(plain(message))  # names grades and files
fit_notes = st.session_state.pop("_library_fit_notes", None)
if fit_notes:
    count = sum(len(v) for v in fit_notes.values())
    with st.expander(
        f"Fit notes of the grades just written ({count} for {len(fit_notes)} grade(s))",
        expanded=count > 0,
    ):
        for gid, notes in fit_notes.items():
            st.markdown(
                f"**{plain(gid)}**: " + ("; ".join(plain(n) for n in notes) or "no warning")
            )


def _rev(name: str) -> int:
    return st.session_state.get(f"_rev_{name}", 0)


def _bump(name: str) -> None:
    st.session_state[f"_rev_{name}"] = _rev(name) + 1


def _show_preview(preview: importing.Preview, where: str) -> None:
    """The validation report and preview; the write button."""
    st.success("All files are valid.")
    st.markdown("**Files**")
    st.dataframe(preview.files, hide_index=True, placeholder=MISSING, width="stretch")
    if not preview.grades.empty:
        st.markdown("**Catalog rows to write**")
        st.dataframe(preview.grades, hide_index=True, placeholder=MISSING, width="stretch")
    if not preview.datasets.empty:
        st.markdown("**Data sets to write**")
        st.dataframe(preview.datasets, hide_index=True, placeholder=MISSING, width="stretch")
    if preview.empty:
        st.info("Nothing new: every file is already in the library.")
        return
    if st.button("Write to library", type="primary", key=f"write_{where}"):
        summary = importing.write(lib, preview)
        data.fits(lib)  # refit now, with a progress bar
        written = [
            *summary.materials_added,
            *summary.materials_updated,
            *(gid for gid, _ in summary.datasets_added),
        ]
        st.session_state["_library_fit_notes"] = importing.fit_notes(lib, written)
        _bump(where)
        st.session_state["_library_msg"] = (
            f"Written: {len(summary.materials_added)} grade(s) added, "
            f"{len(summary.materials_updated)} updated, {len(summary.datasets_added)} data "
            f"set(s) added"
            + (f"; skipped {', '.join(summary.files_skipped)}" if summary.files_skipped else "")
        )
        st.rerun()


def _import_format() -> None:
    files = st.file_uploader(
        "Catalog and sweep files (CSV or XLSX, the import format)",
        type=None,  # any file: importing.check_type gives a refused one its reason
        accept_multiple_files=True,
        key=f"upload_format_{_rev('format')}",
    )
    if not files:
        st.caption(
            "Catalog: id, name, mode (tensile or shear), optional supplier, family, "
            "density [kg/m3], price [per kg], hardness [Shore A], service_min/max [degC], "
            "poisson_ratio, notes. Sweeps: material, temperature [unit], frequency [unit], "
            "storage_modulus [unit], loss_factor or loss_modulus [unit]."
        )
        return
    preview, error = importing.try_plan(
        importing.plan_uploads, lib, [(f.name, f.getvalue()) for f in files]
    )
    if preview is None:
        st.error(plain(error))
        st.caption("Nothing was written.")
        return
    _show_preview(preview, "format")


def _import_mapped() -> None:
    rev = _rev("mapped")
    upload = st.file_uploader(
        "Instrument export (CSV or XLSX, any column names)",
        type=None,  # any file: importing.check_type gives a refused one its reason
        key=f"upload_export_{rev}",
    )
    cat = st.file_uploader(
        "Catalog for grades not yet in the library (optional)",
        type=None,  # any file: importing.check_type gives a refused one its reason
        key=f"upload_export_catalog_{rev}",
    )
    if upload is None:
        return
    export = (upload.name, upload.getvalue())
    table, error = importing.try_plan(importing.read_export, *export)
    if table is None:
        st.error(plain(error))
        st.caption("Nothing was written.")
        return
    st.markdown("**First rows of the export**")
    st.dataframe(table.frame.head(8), hide_index=True, placeholder=MISSING, width="stretch")
    headers = list(table.headers)
    guess = importing.guess_mapping(headers)
    st.markdown("**Which column is which**")
    mapping, units = {}, {}
    loss_kind = st.radio(
        "The export gives",
        ("loss factor", "loss modulus"),
        horizontal=True,
        index=0 if guess["loss_factor"] or not guess["loss_modulus"] else 1,
        key="map_loss_kind",
    )
    targets = ["temperature", "frequency", "storage_modulus"]
    targets.append("loss_factor" if loss_kind == "loss factor" else "loss_modulus")
    cols = st.columns(len(targets))
    for col, target in zip(cols, targets, strict=True):
        label = target.replace("_", " ")
        pick = guess.get(target)
        mapping[target] = col.selectbox(
            label,
            headers,
            index=headers.index(pick) if pick in headers else 0,
            key=f"map_col_{target}",
        )
        allowed = importing.MAPPING_TARGETS[target]
        if allowed:
            unit = importing.guess_unit(mapping[target], target)
            units[target] = col.selectbox(
                f"unit of {label}",
                allowed,
                index=allowed.index(unit) if unit in allowed else 0,
                key=f"map_unit_{target}",
            )
    grade_from = st.radio(
        "Grade",
        ("one grade for every row", "a column names the grade"),
        horizontal=True,
        index=1 if guess.get("material") else 0,
        key="map_grade_from",
    )
    material_id = None
    if grade_from == "a column names the grade":
        pick = guess.get("material")
        mapping["material"] = st.selectbox(
            "grade column",
            headers,
            index=headers.index(pick) if pick in headers else 0,
            key="map_col_material",
        )
    else:
        material_id = st.selectbox(
            "grade id (a library grade, or a new id from the catalog above)",
            sorted(lib.existing_ids()),
            index=None,
            accept_new_options=True,
            placeholder="choose or type a grade id",
            key="map_grade_id",
        )
        if not material_id:
            st.info("Choose the grade these measurements belong to.")
            return
    catalogs = [(cat.name, cat.getvalue())] if cat is not None else []
    preview, error = importing.try_plan(
        importing.plan_mapped, lib, export, mapping, units, material_id, catalogs
    )
    if preview is None:
        st.error(plain(error))
        st.caption("Nothing was written.")
        return
    _show_preview(preview, "mapped")


def _catalog() -> None:
    mats = lib.materials()
    if not mats:
        st.caption("The library holds no grade.")
        return
    frame = pd.DataFrame(
        [
            {
                "id": m.id,
                "name": m.name,
                "mode": m.mode,
                "family": m.family,
                "supplier": m.supplier,
                "price": m.price,
                "notes": m.notes,
                "density [kg/m3]": m.density,
                "hardness [Shore A]": m.hardness,
                "service from [degC]": m.service_min,
                "service to [degC]": m.service_max,
                "fitted": m.id in ctx.curves,
            }
            for m in mats
        ]
    )
    editable = ("supplier", "price", "notes")
    edited = st.data_editor(
        frame,
        key=f"catalog_editor_{_rev('catalog')}",
        hide_index=True,
        placeholder=MISSING,
        width="stretch",
        disabled=[c for c in frame.columns if c not in editable],
        column_config={
            "price": st.column_config.NumberColumn("price [per kg]", min_value=0.0, format="%g"),
            "notes": st.column_config.TextColumn(width="large"),
        },
    )
    changes: dict[str, dict] = {}
    for (_, old), (_, new) in zip(frame.iterrows(), edited.iterrows(), strict=True):
        diff = {}
        for c in editable:
            a, b = old[c], new[c]
            a = None if a is None or (isinstance(a, float) and math.isnan(a)) else a
            b = None if b is None or (isinstance(b, float) and math.isnan(b)) else b
            if isinstance(b, str) and not b.strip():
                b = None
            if a != b:
                diff[c] = float(b) if (c == "price" and b is not None) else b
        if diff:
            changes[old["id"]] = diff
    c1, c2 = st.columns([1, 3])
    if c1.button(
        f"Save {len(changes)} change(s)" if changes else "No changes to save",
        disabled=not changes,
        key="catalog_save",
    ):
        for gid, diff in changes.items():
            lib.update_catalog(gid, diff, reason="edited in the dashboard")
        _bump("catalog")
        st.session_state["_library_msg"] = f"Catalog changes saved for {', '.join(changes)}."
        st.rerun()
    c2.caption("Supplier, price and notes can be edited here; each change keeps the old row.")
    with st.expander("Change history of a grade"):
        gid = st.selectbox("Grade", [m.id for m in mats], key="history_grade")
        hist = lib.history(gid)
        if hist:
            st.dataframe(
                pd.DataFrame(
                    [{"changed at": h["changed_at"], "reason": h["reason"]} for h in hist]
                ),
                hide_index=True,
                placeholder=MISSING,
            )
        else:
            st.caption("No change since the grade was imported.")


def _provenance() -> None:
    sets = lib.datasets()
    st.markdown("**Data sets** (the newest of each grade is the one fitted)")
    st.dataframe(
        pd.DataFrame(
            [
                {
                    "grade": d.material_id,
                    "data set": d.dataset_id,
                    "points": d.n_points,
                    "file": d.file_name,
                    "file sha256": d.sha256[:16],
                    "imported at": d.imported_at,
                    "data hash": d.data_hash[:16],
                }
                for d in sets
            ]
        ),
        hide_index=True,
        placeholder=MISSING,
        width="stretch",
    )
    st.markdown("**Imports**")
    st.dataframe(
        pd.DataFrame(
            [
                {
                    "import": i["import_id"],
                    "file": i["file_name"],
                    "kind": i["kind"],
                    "rows": i["rows"],
                    "bytes": i["size_bytes"],
                    "sha256": i["sha256"][:16],
                    "imported at": i["imported_at"],
                }
                for i in lib.imports()
            ]
        ),
        hide_index=True,
        placeholder=MISSING,
        width="stretch",
    )
    if ctx.fit_errors:
        st.markdown("**Fits that failed**")
        for gid, reason in sorted(ctx.fit_errors.items()):
            st.error(f"{plain(gid)}: {plain(reason)}")


def _delete() -> None:
    ids = sorted(lib.existing_ids())
    c1, c2 = st.columns(2)
    with c1:
        st.markdown("**Delete a grade**")
        if ids:
            gid = st.selectbox("Grade", ids, key="delete_grade")
            sure = st.checkbox(
                f"Yes, hide {plain(gid)} and its data sets (they can be restored)",
                key=f"delete_sure_{_rev('delete')}",
            )
            if st.button("Delete grade", disabled=not sure, key="delete_go"):
                try:
                    lib.delete_material(gid)
                except LibraryError as exc:
                    st.error(plain(exc))
                else:
                    _bump("delete")
                    st.session_state["_library_msg"] = f"{gid} deleted (restore it below)."
                    st.rerun()
        else:
            st.caption("No grade to delete.")
    with c2:
        st.markdown("**Deleted grades**")
        gone = lib.deleted_ids()
        if not gone:
            st.caption("None.")
            return
        st.dataframe(pd.DataFrame({"grade": gone}), hide_index=True, placeholder=MISSING)
        gid = st.selectbox("Grade to restore", gone, key="restore_grade")
        if st.button("Restore grade", key="restore_go"):
            lib.restore_material(gid)
            st.session_state["_library_msg"] = f"{gid} restored."
            st.rerun()


tabs = st.tabs(["Import", "Catalog", "Data sets", "Delete and restore"])
with tabs[0]:
    how = st.radio(
        "What to import",
        ("files in the import format", "one instrument export (map its columns)"),
        horizontal=True,
        key="import_how",
    )
    if how == "files in the import format":
        _import_format()
    else:
        _import_mapped()
with tabs[1]:
    _catalog()
with tabs[2]:
    _provenance()
with tabs[3]:
    _delete()
