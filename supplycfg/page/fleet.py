"""Several machines for the job in use: one search per machine file, as ``supplycfg fleet`` does.

Drawn only when asked for (a toggle): the first screen stays the answer for
the machine in use. The rows are the core's (:func:`supplycfg.fleet.fleet_rows`).
"""

import streamlit as st

from ..errors import InputError
from ..report import md_data
from . import fields, state

S = st.session_state
#: Most machine files searched on the page at once: they run one after another in the
#: page's own process (about a quarter of a second each); the command line takes a folder.
MAX_PAGE_FLEET_FILES = 24


@st.cache_data(max_entries=8, show_spinner="Searching each machine for this job...")
def fleet(items, profile_toml):
    """``(FleetResult, None)`` or ``(None, message)`` for ``(name, text, error)`` and the job's TOML."""
    from ..fleet import fleet_search_texts
    from ..profile import load_profile
    try:
        return fleet_search_texts(items, load_profile("profile.toml", profile_toml), "the files given"), None
    except InputError as e:
        return None, str(e)
    except Exception as e:  # a fault of ours: one line, never a traceback on the page
        return None, f"internal error, please report it: {type(e).__name__}: {e}"


def _items():
    """``(name, text, error)`` of the uploads and, when ticked, the demo machines (``error``: a refused file)."""
    items = []
    for up in S.get("fleet_upload") or []:
        try:
            items.append((up.name, state.upload_bytes(up), None))
        except InputError as e:
            items.append((up.name, None, str(e)))
    if S.get("fleet_demos"):
        items += [(f"{stem}.toml", path.read_bytes(), None) for stem, path in fields.demo_machines().items()]
    return items


def fleet_section(profile_toml):
    """The toggle, the machine files and, once given, one row per machine."""
    st.header("Which of your machines can do this job?", anchor="fleet")
    if not st.toggle("Compare several machines for this job", key="show_fleet"):
        return
    st.file_uploader(f"Machine files (.toml, up to {MAX_PAGE_FLEET_FILES} files of 1 MB each)", type=["toml"],
                     accept_multiple_files=True, key="fleet_upload", max_upload_size=1)
    st.checkbox("Add the demo machines", key="fleet_demos")
    items = _items()
    if not items:
        st.info("Give machine files, or add the demo machines, to see which can do this job.")
        return
    if len(items) > MAX_PAGE_FLEET_FILES:
        st.error(f"{len(items)} machine files given; the page takes at most {MAX_PAGE_FLEET_FILES} "
                 "(for more, put them in a folder and run `supplycfg fleet FOLDER JOB`).")
        return
    res, err = fleet(tuple(items), profile_toml)
    if res is None:
        st.error(md_data(err))
        return
    from ..fleet import fleet_rows
    rows = fleet_rows(res, trade_words=True)
    n_ok = sum(r["can do it"] == "yes" for r in rows)
    st.markdown(f"**{n_ok}** of {len(rows)} machines meet every limit of this job with their best setting.")
    for n in res.notes:
        st.warning(md_data(n))
    st.dataframe([{k: v for k, v in r.items() if k != "error"} for r in rows], hide_index=True, key="fleet_table")
    for r in rows:
        if r["error"]:
            st.error(f"{md_data(r['machine file'])}: {md_data(r['error'])}")
    st.caption("Each machine is searched with its own best setting; load it as the machine in use to see its "
               "meter readings, bands and sheet.")
