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


def chart_problems(ws):
    """What is wrong with where a sheet's charts stand (a list of messages): each chart must start
    below the sheet's last row that holds a cell (the table and its notes), so that it never
    stands beside the table and widens the printed page, and must end within the width of a
    portrait page. Anchors are zero-based rows and columns (ECMA-376 Part 1, 20.5.2.33, the
    from/to markers of a two-cell anchor); openpyxl's max_row is one-based, so a chart whose top
    row index is >= max_row starts on a row below the last one used."""
    bad = []
    for k, ch in enumerate(ws._charts):
        frm = getattr(ch.anchor, "_from", None)
        to = getattr(ch.anchor, "to", None)
        if frm is None or to is None:
            bad.append(f"{ws.title}: chart {k + 1} has no two-cell anchor ({type(ch.anchor).__name__})")
            continue
        if frm.row < ws.max_row:
            bad.append(f"{ws.title}: chart {k + 1} starts on row {frm.row + 1}, beside or above the last row "
                       f"of the table ({ws.max_row})")
        right = sum(col_px(ws, j) for j in range(1, to.col + 1)) + to.colOff / 9525
        if right > PORTRAIT_PX + 2:
            bad.append(f"{ws.title}: chart {k + 1} ends {right:.0f} px from the left edge, wider than a portrait "
                       f"page ({PORTRAIT_PX:.0f} px)")
    return bad


# Wrapped text on paper (common practice, no source; an approximation): a letter of running
# English text in Calibri 11 pt (or Carlito, its metric twin) is about 6 px wide at 96 dpi on
# average (the digits are 7 px), bold about a tenth wider; a cell loses about 3 px of padding on
# each side; a wrapped line of 11 pt type needs about 1.22 em, 13.4 pt, of row height
# (LibreOffice and Excel both use the font's own line spacing, about 1.22 em for Calibri). A
# line breaks at spaces; a word longer than a line is cut across lines.
LETTER_PX = 6.0
BOLD_FACTOR = 1.1
CELL_PADDING_PX = 6.0
LINE_PT = 13.4


def wrapped_lines(text, px, bold=False):
    """Lines text needs in a wrapped cell px pixels wide, by the rule above."""
    per = max(1, int((px - CELL_PADDING_PX) / (LETTER_PX * (BOLD_FACTOR if bold else 1.0))))
    lines = 0
    for para in str(text).split("\n"):
        lines += 1
        at = 0
        for word in para.split():
            w = len(word)
            if at and at + 1 + w > per:
                lines += 1
                at = 0
            if w > per:
                lines += (w - 1) // per
                w = w - (w - 1) // per * per
            at += (1 if at else 0) + w
    return lines


def wrapped_row_problems(ws, first_row=1):
    """Rows from first_row whose wrapped text would be cut on paper (a list of messages): for each
    cell that wraps and holds text, the lines it needs in its width (a merged range's whole width)
    by wrapped_lines, against its row's height (15 pt, the default, when the row has none)."""
    spans = {}
    for m in ws.merged_cells.ranges:
        spans[(m.min_row, m.min_col)] = sum(col_px(ws, j) for j in range(m.min_col, m.max_col + 1))
    bad = []
    for row in ws.iter_rows(min_row=first_row):
        for c in row:
            if not isinstance(c.value, str) or not c.alignment or not c.alignment.wrap_text:
                continue
            px = spans.get((c.row, c.column), col_px(ws, c.column))
            if px == 0:
                continue   # a hidden column
            lines = wrapped_lines(c.value, px, bool(c.font and c.font.b))
            h = ws.row_dimensions[c.row].height or 15.0
            if h + 0.01 < lines * LINE_PT:
                bad.append(f"{ws.title}!{c.coordinate}: {len(c.value)} characters need {lines} lines "
                           f"({lines * LINE_PT:.1f} pt) in {px:.0f} px, the row is {h:.1f} pt: {c.value[:50]!r}")
    return bad
