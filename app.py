"""supplycfg's page: ``streamlit run app.py --server.address 127.0.0.1``.

Run as ``python app.py`` it starts Streamlit itself, bound to this computer
(127.0.0.1) unless ``--server.address`` is given.
"""

import sys


def _launch():
    from streamlit.web import cli
    args = sys.argv[1:]
    if not any(a.startswith("--server.address") for a in args):
        args = ["--server.address", "127.0.0.1"] + args
    sys.argv = ["streamlit", "run", __file__, "--browser.gatherUsageStats", "false",
                "--client.toolbarMode", "minimal"] + args
    sys.exit(cli.main())


def _under_streamlit():
    try:
        from streamlit import runtime
        return runtime.exists()
    except Exception:
        return False


if __name__ == "__main__" and not _under_streamlit():
    _launch()
else:
    from supplycfg.page import main
    main()
