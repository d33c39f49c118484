/** Common base of Skysieve's Objection models: created_at / updated_at maintained in code. */
import { Model } from 'objection';

export class BaseModel extends Model {
  createdAt!: Date;
  updatedAt!: Date;

  /** Tables without an updated_at column set this to false. */
  static hasUpdatedAt = true;

  override $beforeInsert(): void {
    const now = new Date();
    this.createdAt ??= now;
    if ((this.constructor as typeof BaseModel).hasUpdatedAt) this.updatedAt ??= now;
  }

  override $beforeUpdate(): void {
    if ((this.constructor as typeof BaseModel).hasUpdatedAt) this.updatedAt = new Date();
  }
}

/** ISO 8601 text for API bodies. */
export const isoDate = (value: Date | string): string => new Date(value).toISOString();
export const isoDateOrNull = (value: Date | string | null | undefined): string | null =>
  value === null || value === undefined ? null : new Date(value).toISOString();
