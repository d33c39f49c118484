/**
 * The logic of the column-mapping form: which quantities can be chosen, the choices a person made checked before
 * they are sent, and the mapping to start the form from (the one the server would use, else its guess).
 */
import type {
  ColumnMappingInput,
  MappingField,
  ReferenceColumnDto,
  ReferencePositions,
  ReferencePreview,
} from '@shared/cross-match';

export const MAPPING_LABELS: Record<MappingField, string> = {
  ra: 'Right ascension (RA)',
  dec: 'Declination (Dec)',
  x: 'Pixel x (FITS, 1-based)',
  y: 'Pixel y (FITS, 1-based)',
  flux: 'Flux or flux density',
  id: 'Name or id',
};

/** The fields shown for sky or pixel positions (flux and id in both). */
export function fieldsFor(positions: ReferencePositions): MappingField[] {
  return positions === 'sky' ? ['ra', 'dec', 'flux', 'id'] : ['x', 'y', 'flux', 'id'];
}

/** A select option per column, with its unit and UCD when the file gives them. */
export function columnOptions(columns: readonly ReferenceColumnDto[]): { label: string; value: string }[] {
  return columns.map((column) => {
    const extra = [column.unit, column.ucd].filter((part): part is string => Boolean(part));
    return {
      label: extra.length > 0 ? `${column.name} (${extra.join(', ')})` : column.name,
      value: column.name,
    };
  });
}

/** What is wrong with the choices, one sentence each (empty when they can be sent). */
export function mappingProblems(mapping: ColumnMappingInput, positions: ReferencePositions): string[] {
  const problems: string[] = [];
  const [first, second] = positions === 'sky' ? (['ra', 'dec'] as const) : (['x', 'y'] as const);
  for (const field of [first, second]) {
    if (!mapping[field]) problems.push(`Choose the column for ${MAPPING_LABELS[field]}.`);
  }
  const used = new Map<string, MappingField[]>();
  for (const field of fieldsFor(positions)) {
    const column = mapping[field];
    if (!column) continue;
    used.set(column, [...(used.get(column) ?? []), field]);
  }
  for (const [column, fields] of used) {
    if (fields.length > 1) {
      problems.push(
        `Column «${column}» is chosen for ${fields.map((field) => MAPPING_LABELS[field]).join(' and ')}; each quantity needs its own column.`,
      );
    }
  }
  return problems;
}

/** Only the fields of the chosen kind of position, without empty choices: what is sent. */
export function mappingToSend(
  mapping: ColumnMappingInput,
  positions: ReferencePositions,
): ColumnMappingInput {
  const out: ColumnMappingInput = {};
  for (const field of fieldsFor(positions)) {
    const column = mapping[field];
    if (column) out[field] = column;
  }
  return out;
}

/** The form's starting point: the mapping the server would use, else its guess, with the kind of positions. */
export function initialChoices(preview: ReferencePreview): {
  mapping: ColumnMappingInput;
  positions: ReferencePositions;
} {
  const mapping = { ...(preview.mapping ?? preview.guessedMapping) };
  const positions: ReferencePositions =
    preview.positions ?? (mapping.ra || mapping.dec || !(mapping.x && mapping.y) ? 'sky' : 'pixel');
  return { mapping, positions };
}
