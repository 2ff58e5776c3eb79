/** What the export picker's endpoints answer (GET /api/exports/units, /api/exports/units/serials); server and island share it. */
export interface ExportableUnit {
  serial: string;
  site: string;
  needsAttention: boolean;
  modelName: string;
  setId: string;
  version: number;
  approvedAt: string;
}

export interface ExportableUnitsPage {
  q: string;
  page: number;
  pageSize: number;
  /** Units that match, counted exactly up to 1 000 … */
  total: number;
  /** … and true when more match than that (then `total` is 1 000). */
  totalIsLowerBound: boolean;
  items: ExportableUnit[];
}

export interface ExportableSerials {
  q: string;
  /** The batch limit: at most this many serials are listed. */
  limit: number;
  /** More units match than the limit. */
  more: boolean;
  serials: string[];
}

/** Rows of the export picker's table per page. */
export const EXPORT_PICKER_PAGE = 50;
