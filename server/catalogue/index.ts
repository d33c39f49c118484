/**
 * Catalogue exports, reference reading, cross-matching, number counts and the pure parts of the completeness
 * study. Pure functions over arrays and text; the only file that touches the disk is write-catalogue-files.
 */
export * from './catalogue-table';
export { tableToCsv, csvSidecar, type CsvSidecar } from './export-csv';
export { tableToVotable, VOTABLE_NAMESPACE, INT_NULL } from './export-votable';
export { tableToFitsBintable } from './export-fits-table';
export * from './write-catalogue-files';
export * from './read-reference';
export * from './cross-match';
export * from './match-table';
export * from './match-reference';
export * from './number-counts';
export * from './completeness';
export * from './result-tables';
