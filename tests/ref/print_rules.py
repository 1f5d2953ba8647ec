"""The print rule of the workbook writer (src/export/workbook.c) as the reference checks read it
back with openpyxl: a sheet's printed width, and what is wrong with its print set-up. Shared by
test_workbook_readback.py and test_first_page_pdf.py (not a test itself: tests/run-all runs
test_*.py only)."""
import openpyxl


def col_px(ws, j):
    """Printed width in px of column j (from 1): a width of w units (digits of Calibri 11 pt, the
    workbook's default font) is 7 w + 5 px, and the file stores (7 w + 5) / 7, the padding
    included; 0 when hidden; a column without a width has Excel's default, 64 px."""
    letter = openpyxl.utils.get_column_letter(j)
    if letter not in ws.column_dimensions:   # openpyxl would make one of its own default width
        return 64
    d = ws.column_dimensions[letter]
    return 0 if d.hidden else round(7 * d.width) if d.width is not None else 64


def sheet_px(ws):
    """The printed width of a sheet in px: its columns, and the charts beside them (a chart's right
    edge: the left of its anchor's last column plus the offset, 9525 EMU a pixel, ECMA-376 Part 1,
    20.1.2.1)."""
    px = sum(col_px(ws, j) for j in range(1, ws.max_column + 1))
    for ch in ws._charts:
        to = getattr(ch.anchor, "to", None)
        if to is not None:
            px = max(px, sum(col_px(ws, j) for j in range(1, to.col + 1)) + to.colOff / 9525)
    return px


# Print rule of src/export/workbook.c: A4 less 0.5 in side margins at 96 dpi is 698 px wide
# portrait and 1027 px landscape; a sheet prints one page wide unless that would shrink it below
# 60 % (common practice, no source: 11 pt text below 6.6 pt is hard to read on paper), and then at
# 60 % over pages across, its leading text columns repeated.
PORTRAIT_PX = (210 / 25.4 - 1.0) * 96
LANDSCAPE_PX = (297 / 25.4 - 1.0) * 96
MIN_SCALE = 0.60


def print_rule_problems(ws, title_rows):
    """What is wrong with a sheet's print set-up (a list of messages)."""
    bad = []
    ps = ws.page_setup
    name = ws.title
    if ps.paperSize not in (9, "9"):   # A4: paperSize 9, ECMA-376 Part 1, 18.3.1.63
        bad.append(f"{name}: paper size {ps.paperSize!r}, want 9 (A4)")
    if ws.print_title_rows != title_rows:
        bad.append(f"{name}: rows repeated on each page {ws.print_title_rows!r}, want {title_rows}")
    px = sheet_px(ws)
    want_o = "landscape" if px > PORTRAIT_PX + 2 else "portrait"
    if ps.orientation != want_o and abs(px - PORTRAIT_PX) > 2:
        bad.append(f"{name}: {ps.orientation} for {px:.0f} px, want {want_o}")
    fit = ws.sheet_properties.pageSetUpPr is not None and bool(ws.sheet_properties.pageSetUpPr.fitToPage)
    if LANDSCAPE_PX / px >= MIN_SCALE + 0.005:
        # openpyxl leaves out fitToWidth when it is the default, 1.
        if not fit or ps.fitToWidth not in (None, 1, "1") or ps.fitToHeight not in (0, "0"):
            bad.append(f"{name}: {px:.0f} px, want fit to 1 page wide x any tall, found fit={fit} "
                       f"{ps.fitToWidth} x {ps.fitToHeight}")
    elif LANDSCAPE_PX / px <= MIN_SCALE - 0.005:
        if fit or ps.scale not in (60, "60"):
            bad.append(f"{name}: {px:.0f} px ({LANDSCAPE_PX / px:.0%} to fit), want a scale of 60 % without "
                       f"fitting, found fit={fit}, scale {ps.scale}")
        if not (ws.print_title_cols or "").startswith("$A:$"):
            bad.append(f"{name}: printed over pages across without repeated key columns ({ws.print_title_cols!r})")
    return bad
