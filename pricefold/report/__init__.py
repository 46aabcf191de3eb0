"""``pricefold report``: the sign-off as one self-contained HTML page.

``command`` reads the files and writes the page; ``page`` is the document, its policy and the
summary; ``tables`` the people and decisions tables; ``exceptions`` one section per exception;
``charts`` the matplotlib charts as inline SVG.  The data gathering is ``fitcore.ledger.signoff``.
"""
