"""The Streamlit page of supplycfg (``streamlit run app.py``).

Only this package and ``app.py`` import Streamlit. The page arranges the
inputs and shows what the core returns: the machine, the job, the ranked
settings, the chosen one's cautions, curves and setting sheet.
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
    """Draw the whole page."""
    st.set_page_config(page_title="supplycfg · DC generator settings", layout="centered")
    st.markdown(PAGE_CSS, unsafe_allow_html=True)
    from . import inputs, outputs, state
    state.init()
    st.title("supplycfg")
    st.markdown("Put a DC generator on its load: bring the machine's data, say what the load needs, "
                "compare the settings that meet it and take a setting sheet to the machine.")
    if _served_beyond_loopback():
        st.warning("This page is being reached over the network. Start it with `--server.address 127.0.0.1` "
                   "to keep it on this computer.")
    inputs.machine_section()
    inputs.job_section()
    mt, pt = state.texts()
    key = state.digest(mt, pt)
    result, err = state.solve(mt, pt)
    if result is None:
        st.error(err)
        return
    option = outputs.options_section(result, key)
    outputs.drive_size_section(result, mt, pt)
    if option is not None:
        run, run_msg = state.charge(mt, pt, option.rank) if result.profile.kind == "battery" else (None, None)
        outputs.detail_section(result, option)
        outputs.curves_section(result, option, run, run_msg, key, (mt, pt))
        outputs.downloads_section(result, option, run, key, mt, pt)
    st.divider()
    st.markdown(f"**{STANDING_NOTICE}**")
    st.caption(f"supplycfg {__version__}")
