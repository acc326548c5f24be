// The one way to build a table: a list of columns and a list of rows.

/**
 * Fills `table`'s body with one row per item of `rows` and shows the table. A column is a function
 * `(row, i) => text`, or `{ label, value(row, i), className(row, i) }` for a cell class or a head.
 * When the columns carry labels the head is rebuilt from them; otherwise the table's own head (in
 * the HTML) stays. `rowClass(row, i)` gives a row's class.
 */
export function fillTable(table, columns, rows, { rowClass } = {}) {
  const cols = columns.map((c) => (typeof c === 'function' ? { value: c } : c));
  if (cols.some((c) => c.label != null)) {
    const tr = document.createElement('tr');
    for (const c of cols) tr.append(Object.assign(document.createElement('th'), { textContent: c.label ?? '' }));
    table.tHead.replaceChildren(tr);
  }
  table.tBodies[0].replaceChildren(...rows.map((row, i) => {
    const tr = document.createElement('tr');
    const cls = rowClass?.(row, i);
    if (cls) tr.className = cls;
    for (const c of cols) {
      const td = document.createElement('td');
      td.textContent = c.value(row, i);
      const tdClass = c.className?.(row, i);
      if (tdClass) td.className = tdClass;
      tr.append(td);
    }
    return tr;
  }));
  table.hidden = false;
}
