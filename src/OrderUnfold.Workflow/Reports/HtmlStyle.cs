namespace OrderUnfold.Reports;

/// <summary>
/// The look of report.html (our own: a slate header band, a contents strip, tables with a tinted head, warnings in an
/// amber box, refusals in red) and the script that sorts tables. Both are inline in every page, so the page needs nothing
/// else; both avoid the characters &lt; and &amp;, so the page stays well-formed XML.
/// </summary>
internal static class HtmlStyle
{
    /// <summary>The style sheet, with a print version (no contents column, figures kept whole, black on white).</summary>
    public const string Css = """

        :root { --ink: #1d2731; --muted: #5a6672; --line: #d5dbe1; --head: #27394b; --tint: #eef2f6; --accent: #2b5c8a;
                --warn-bg: #fff5dc; --warn-edge: #a07d00; --bad: #a3192f; --good: #1f6b3a; }
        * { box-sizing: border-box; }
        body { margin: 0; color: var(--ink); background: #fbfcfd; font: 15px/1.45 "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; }
        header { background: var(--head); color: #f4f7fa; padding: 18px 28px 14px; }
        header h1 { margin: 2px 0 4px; font-size: 24px; font-weight: 600; }
        header .tool { margin: 0; font-size: 12px; letter-spacing: 0.06em; text-transform: uppercase; color: #b9c7d4; }
        header .run { margin: 0; font-size: 13px; color: #d7e0e8; word-break: break-all; }
        nav { background: var(--tint); border-bottom: 1px solid var(--line); padding: 7px 28px; font-size: 13px; }
        nav .box-title { display: inline; margin-right: 10px; color: var(--muted); }
        nav ol { display: inline; margin: 0; padding: 0; list-style: none; counter-reset: part; }
        nav li { display: inline-block; margin-right: 14px; counter-increment: part; }
        nav li::before { content: counter(part) ". "; color: var(--muted); }
        nav a { color: var(--accent); text-decoration: none; }
        main { padding: 4px 28px 28px; max-width: 1400px; }
        section { margin-top: 18px; padding-top: 4px; border-top: 2px solid var(--line); }
        h2 { font-size: 19px; margin: 10px 0 8px; color: var(--head); }
        h3 { font-size: 15px; margin: 14px 0 6px; color: var(--head); }
        p.quiet, p.empty { color: var(--muted); font-style: italic; }
        p.bad { color: var(--bad); font-weight: 600; }
        .box { border-left: 5px solid var(--accent); background: var(--tint); padding: 8px 14px; margin: 8px 0 12px; }
        .box.warnings { border-color: var(--warn-edge); background: var(--warn-bg); }
        .box.refusals { border-color: var(--bad); background: #fbe9ec; }
        .box ul { margin: 4px 0; padding-left: 20px; }
        .box-title { margin: 0; font-weight: 600; }
        dl.facts { display: grid; grid-template-columns: max-content auto; gap: 3px 18px; margin: 6px 0 12px; }
        dl.facts dt { color: var(--muted); }
        dl.facts dd { margin: 0; }
        .scroll { overflow-x: auto; margin: 6px 0 14px; }
        table { border-collapse: collapse; font-size: 13px; }
        caption { text-align: left; font-weight: 600; padding: 4px 0; color: var(--head); }
        th { background: var(--tint); text-align: left; padding: 5px 8px; border-bottom: 2px solid var(--line); white-space: nowrap; }
        td { padding: 4px 8px; border-bottom: 1px solid var(--line); vertical-align: top; }
        td.short { white-space: nowrap; }
        td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
        td.good { color: var(--good); } td.warn { color: var(--warn-edge); font-weight: 600; } td.bad { color: var(--bad); font-weight: 600; }
        td.hash { font-family: "DejaVu Sans Mono", monospace; font-size: 12px; word-break: break-all; }
        tbody tr:nth-child(even) { background: #f5f7f9; }
        th.sortable-head { cursor: pointer; }
        th.sortable-head::after { content: " \2195"; color: #9aa6b2; }
        th[aria-sort="ascending"]::after { content: " \2191"; color: var(--ink); }
        th[aria-sort="descending"]::after { content: " \2193"; color: var(--ink); }
        .figures { display: flex; flex-wrap: wrap; gap: 14px; }
        figure { margin: 0; background: #fff; border: 1px solid var(--line); padding: 6px; max-width: 100%; }
        figure svg { display: block; width: 100%; height: auto; }
        figcaption { font-size: 12.5px; color: var(--muted); padding: 4px 2px 0; }
        footer { padding: 12px 28px 24px; font-size: 12px; color: var(--muted); border-top: 1px solid var(--line); }
        @media print {
          body { background: #fff; font-size: 11pt; }
          header { background: #fff; color: #000; border-bottom: 2px solid #000; padding: 0 0 6px; }
          header .tool, header .run { color: #333; }
          nav { display: none; }
          main, footer { padding: 0; max-width: none; }
          section { break-inside: auto; } figure, tr, .box { break-inside: avoid; }
          th.sortable-head::after { content: ""; }
          .scroll { overflow: visible; }
          table { font-size: 8pt; width: 100%; }
          th { white-space: normal; }
          th, td { padding: 2px 4px; }
          h2, h3 { break-after: avoid; }
          td:not(.short):not(.num) { overflow-wrap: anywhere; }
        }

        """;

    /// <summary>
    /// Sorting: a click on a header sorts the rows by that column (numbers by their <c>data-value</c>, text by its
    /// characters), a second click reverses. Written without &lt; or &amp; so the page remains well-formed XML.
    /// </summary>
    public const string SortScript = """

        (function () {
          function key(row, col) {
            var cell = row.cells[col];
            if (!cell) return "";
            var v = cell.getAttribute("data-value");
            return v === null ? cell.textContent.trim().toLowerCase() : parseFloat(v);
          }
          function compare(a, b) {
            if (typeof a === "number" ? typeof b !== "number" : typeof b === "number") return typeof a === "number" ? -1 : 1;
            return a === b ? 0 : (a > b ? 1 : -1);
          }
          document.querySelectorAll("table.sortable").forEach(function (table) {
            var heads = table.tHead ? Array.prototype.slice.call(table.tHead.rows[0].cells) : [];
            heads.forEach(function (th, col) {
              th.classList.add("sortable-head");
              th.title = "sort by this column";
              th.addEventListener("click", function () {
                var up = th.getAttribute("aria-sort") !== "ascending";
                heads.forEach(function (h) { h.removeAttribute("aria-sort"); });
                th.setAttribute("aria-sort", up ? "ascending" : "descending");
                var body = table.tBodies[0];
                var rows = Array.prototype.slice.call(body.rows);
                rows.sort(function (a, b) { var c = compare(key(a, col), key(b, col)); return up ? c : -c; });
                rows.forEach(function (r) { body.appendChild(r); });
              });
            });
          });
        })();

        """;
}
