"""supplycfg's page: ``supplycfg page`` (or ``streamlit run app.py`` from this folder).

Run as ``python app.py`` it starts Streamlit itself with the settings of
``supplycfg page`` (this computer only, 1 MB uploads, ...) as flags; a flag
given on the command line replaces its default.
"""

import sys


def _launch():
    from streamlit.web import cli
    from supplycfg.cli import PAGE_FLAGS
    args = sys.argv[1:]
    flags = []
    for key, value in PAGE_FLAGS.items():
        if not any(a.startswith(f"--{key}") for a in args):
            flags += [f"--{key}", value]
    sys.argv = ["streamlit", "run", __file__] + flags + args
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
