import {
  flexRender,
  getCoreRowModel,
  getFilteredRowModel,
  getSortedRowModel,
  useReactTable,
  type Row,
  type RowData,
  type Table,
  type TableOptions,
} from '@tanstack/react-table';
import { useVirtualizer } from '@tanstack/react-virtual';
import { useRef, type HTMLAttributes, type ReactNode } from 'react';

declare module '@tanstack/react-table' {
  // eslint-disable-next-line @typescript-eslint/no-unused-vars
  interface ColumnMeta<TData extends RowData, TValue> {
    /** Column width (table-layout is fixed, so rows line up while virtualized). */
    width?: string;
    align?: 'right';
    /** Classes of the body cells. */
    cellClass?: string;
  }
}

export type { ColumnDef } from '@tanstack/react-table';

/**
 * A table's row model with TanStack Table: sorting and filtering by the column definitions,
 * sorting toggles between ascending and descending (never back to unsorted) and starts
 * ascending, as a control room expects of a column header. Filter values passed in `state` must
 * keep their identity between renders (memoize them): the row model is recomputed when they change.
 */
export function useDataTable<T>(options: Omit<TableOptions<T>, 'getCoreRowModel'> & { getCoreRowModel?: TableOptions<T>['getCoreRowModel'] }): Table<T> {
  return useReactTable({
    getCoreRowModel: getCoreRowModel(),
    getSortedRowModel: getSortedRowModel(),
    getFilteredRowModel: getFilteredRowModel(),
    enableSortingRemoval: false,
    sortDescFirst: false,
    // No pagination here; its automatic reset would only cost a state update per filter change.
    autoResetPageIndex: false,
    ...options,
  });
}

const th = 'text-left font-semibold text-ink-2 px-1.5 h-6 border-b border-edge bg-panel-2 sticky top-0 z-[1]';

/**
 * The dense table of the monitor over a TanStack table: a real `<table>` with a header row whose
 * sortable columns are buttons (keyboard reachable, `aria-sort` on the header cell). With
 * `virtual`, only the rows in view are in the DOM (TanStack Virtual; spacer rows above and below
 * keep the scroll height), for tables of thousands of rows.
 */
export function DataTable<T>({
  table,
  label,
  testId,
  rowProps,
  renderRow,
  empty,
  virtual,
  className = '',
}: {
  table: Table<T>;
  label: string;
  testId?: string;
  /** Attributes of a row's `<tr>` (data-*, className). */
  rowProps?: (row: Row<T>, index: number) => HTMLAttributes<HTMLTableRowElement> & Record<`data-${string}`, string | number | undefined>;
  /** A row rendered by the caller (e.g. one that subscribes to live values); default: the columns' cells. */
  renderRow?: (row: Row<T>, index: number) => ReactNode;
  empty?: ReactNode;
  virtual?: { rowHeight: number; height?: string; maxHeight?: string; scrollerLabel: string; scrollerTestId?: string };
  className?: string;
}) {
  const rows = table.getRowModel().rows;
  const scroller = useRef<HTMLDivElement>(null);
  const virt = useVirtualizer({ count: virtual ? rows.length : 0, getScrollElement: () => scroller.current, estimateSize: () => virtual?.rowHeight ?? 24, overscan: 10 });
  const items = virtual ? virt.getVirtualItems() : null;
  const cols = table.getVisibleLeafColumns();
  const shown = items ? items.map((vi) => ({ row: rows[vi.index]!, index: vi.index })) : rows.map((row, index) => ({ row, index }));
  const padTop = items?.length ? items[0]!.start : 0;
  const padBottom = items?.length ? virt.getTotalSize() - items[items.length - 1]!.end : 0;

  const body = (
    <table className={`w-full table-fixed border-collapse text-[12px] ${className}`} aria-label={label} aria-rowcount={rows.length + 1} data-testid={testId}>
      <colgroup>
        {cols.map((c) => (
          <col key={c.id} style={c.columnDef.meta?.width ? { width: c.columnDef.meta.width } : undefined} />
        ))}
      </colgroup>
      <thead>
        {table.getHeaderGroups().map((hg) => (
          <tr key={hg.id} aria-rowindex={1}>
            {hg.headers.map((h) => {
              const sorted = h.column.getIsSorted();
              const right = h.column.columnDef.meta?.align === 'right';
              const text = h.isPlaceholder ? null : flexRender(h.column.columnDef.header, h.getContext());
              return (
                <th key={h.id} scope="col" className={`${th} ${right ? 'text-right' : ''}`} aria-sort={h.column.getCanSort() ? (sorted === 'asc' ? 'ascending' : sorted === 'desc' ? 'descending' : 'none') : undefined}>
                  {h.column.getCanSort() ? (
                    <button type="button" className="h-6 font-semibold text-ink-2 hover:text-ink" onClick={h.column.getToggleSortingHandler()}>
                      {text}
                      <span aria-hidden className="inline-block w-3 text-ink-3">
                        {sorted === 'asc' ? '▲' : sorted === 'desc' ? '▼' : ''}
                      </span>
                    </button>
                  ) : (
                    text
                  )}
                </th>
              );
            })}
          </tr>
        ))}
      </thead>
      <tbody>
        {padTop > 0 ? <tr aria-hidden style={{ height: padTop }} /> : null}
        {shown.map(({ row, index }) =>
          renderRow ? (
            renderRow(row, index)
          ) : (
            <tr key={row.id} aria-rowindex={index + 2} className="border-b border-edge/50" style={virtual ? { height: virtual.rowHeight } : undefined} {...rowProps?.(row, index)}>
              {row.getVisibleCells().map((cell) => (
                <td key={cell.id} className={`px-1.5 py-0.5 ${cell.column.columnDef.meta?.align === 'right' ? 'text-right' : ''} ${cell.column.columnDef.meta?.cellClass ?? ''}`}>
                  {flexRender(cell.column.columnDef.cell, cell.getContext())}
                </td>
              ))}
            </tr>
          ),
        )}
        {padBottom > 0 ? <tr aria-hidden style={{ height: padBottom }} /> : null}
      </tbody>
    </table>
  );
  const none = rows.length === 0 && empty ? <p className="p-2 text-ink-3 text-[12px]">{empty}</p> : null;
  if (!virtual)
    return (
      <>
        {body}
        {none}
      </>
    );
  return (
    <div ref={scroller} tabIndex={0} aria-label={virtual.scrollerLabel} data-testid={virtual.scrollerTestId} className="overflow-y-auto [scrollbar-gutter:stable] bg-panel-2" style={{ height: virtual.height, maxHeight: virtual.maxHeight }}>
      {body}
      {none}
    </div>
  );
}
