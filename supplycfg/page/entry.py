"""The script Streamlit runs for ``supplycfg page``: the page, nothing else.

It lives in the package so the command finds it from any folder; the
settings (loopback address, upload limit, ...) come as flags from
:func:`supplycfg.cli.page_command`.
"""

from supplycfg.page import main

main()
