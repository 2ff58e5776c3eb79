/** A page of the unit list as `GET /api/units` serves it and the units table island shows it. Types only. */

export interface UnitRow {
  serial: string;
  modelId: string;
  model: string;
  revision: number;
  site: string;
  cell: string;
  commissionedOn: string | null;
  needsAttention: boolean;
  /** ISO 8601. */
  createdAt: string;
}

export interface UnitsPage {
  items: UnitRow[];
  total: number;
  page: number;
  pageSize: number;
}
