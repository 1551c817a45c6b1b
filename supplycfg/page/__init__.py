"""The Streamlit page of supplycfg (``streamlit run app.py``).

Only this package and ``app.py`` import Streamlit. The page arranges the
inputs and shows what the core returns. The answer comes first: the
recommended setting in a card (``st.container(key="recommended")``), solved
on load; then the ranked options, the chosen one in detail with its wiring,
curves and setting sheet. The quick choices (job, demo machine, files) sit
in the sidebar; every value can be seen and changed at the foot of the page.
"""

import streamlit as st

from .. import STANDING_NOTICE, __version__

#: Print and narrow-window rules: hide the controls, keep charts and boxes whole.
PAGE_CSS = """
<style>
@media print {
  header, [data-testid="stHeader"], [data-testid="stToolbar"], [data-testid="stSidebar"],
  [data-testid="stDecoration"], [data-testid="stStatusWidget"], [data-testid="stFileUploader"],
  [data-testid="stDownloadButton"], [data-testid="stForm"], [data-testid="stExpander"],
  [data-testid="stSlider"], [data-testid="stRadio"], [data-testid="stSelectbox"],
  [data-testid="stCaptionContainer"], .no-print { display: none !important; }
  [data-testid="stMainBlockContainer"], .block-container { padding: 0 !important; max-width: 100% !important; }
  [data-testid="stVegaLiteChart"], [data-testid="stAlert"], [data-testid="stTable"] {
    break-inside: avoid; page-break-inside: avoid; }
  h2 { break-after: avoid; page-break-after: avoid; }
}
@media (max-width: 640px) {
  [data-testid="stMainBlockContainer"], .block-container { padding-left: .6rem !important; padding-right: .6rem !important; }
}
[data-testid="stMainBlockContainer"], .block-container { padding-top: 3rem !important; }
.st-key-recommended { border-left: 6px solid #1f4e79 !important; }
table.sc-table { width: 100%; border-collapse: collapse; font-size: .9rem; margin: .2rem 0 .6rem; }
table.sc-table th, table.sc-table td { border: 1px solid #d5dae0; padding: .25rem .5rem; text-align: left;
  vertical-align: top; }
table.sc-table th { background: #f0f2f5; font-weight: 600; }
.sc-scroll { max-height: 22rem; overflow: auto; margin-bottom: .6rem; }
.sc-scroll table.sc-table { margin: 0; }
.sc-scroll table.sc-table th { position: sticky; top: 0; }
.sc-scroll table.sc-table td { white-space: nowrap; }
.sc-scroll table.sc-table td:last-child { white-space: normal; min-width: 22rem; }
.st-key-wiring img { max-height: 380px; object-fit: contain; }
</style>
"""


def _served_beyond_loopback():
    """True when the page is reached through an address other than this computer's."""
    try:
        host = (st.context.headers.get("Host") or "").split(":")[0]
    except Exception:
        return False
    return bool(host) and host not in ("localhost", "127.0.0.1", "[::1]", "::1")


def main():
    """Draw the whole page: the answer first, the ranked options, the detail, the inputs at the foot.

    The parts are placed in page order but filled charts first: the browser
    fetches and draws the charts (its longest work) while the rest of the
    page arrives, instead of after it.
    """
    st.set_page_config(page_title="supplycfg · DC generator settings", layout="centered",
                       initial_sidebar_state="auto")
    st.markdown(PAGE_CSS, unsafe_allow_html=True)
    from . import inputs, outputs, state
    state.init()
    st.title("supplycfg", anchor=False)
    st.markdown("Put a DC generator on its load: the setting to use, how to wire it and what to check at the machine.")
    if _served_beyond_loopback():
        st.warning("This page is being reached over the network. Start it with `--server.address 127.0.0.1` "
                   "to keep it on this computer.")
    st.markdown(inputs.in_use_text())
    mt, pt = state.texts()
    key = state.digest(mt, pt)
    result, err = state.solve(mt, pt)
    if result is None:
        from ..report import md_data
        st.error(md_data(err))
    elif not result.options:
        st.warning("No setting to show: " + "; ".join(result.notes))
    else:
        card = outputs.card_box()
        ranked, drive, detail, curves, sheet = (st.container() for _ in range(5))
        option = outputs.picked_option(result, key)
        run, run_msg = state.charge(mt, pt, option.rank) if result.profile.kind == "battery" else (None, None)
        with curves:
            outputs.curves_section(result, option, run, run_msg, key, (mt, pt))
        best = result.options[0]
        best_run = None
        if result.profile.kind == "battery":
            best_run, _ = state.charge(mt, pt, best.rank)
        outputs.recommended_card(result, best_run, card)
        with ranked:
            outputs.options_section(result, key)
        with drive:
            outputs.drive_size_section(result, mt, pt)
        with detail:
            outputs.detail_section(result, option)
        with sheet:
            outputs.downloads_section(result, option, run, key, mt, pt)
    from .fleet import fleet_section
    fleet_section(pt)  # several machines for this job, drawn when asked for
    st.header("The machine and the job in detail", anchor="data")
    inputs.machine_section()
    inputs.job_section()
    st.divider()
    st.markdown(f"**{STANDING_NOTICE}**")
    st.caption(f"supplycfg {__version__}")
    with st.sidebar:  # last: its widgets' callbacks ran before the script, so nothing above waits on them
        inputs.sidebar_picks()
