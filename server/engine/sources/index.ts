/** From the MAP compact field to a refined source catalogue. */
export {
  extractSources,
  type ExtractSourcesInput,
  type ExtractionNoise,
  type ExtractionWcs,
} from './extract-sources';
export {
  groupCompactField,
  convolveOnPaddedGrid,
  type SourceSeed,
  type GroupingResult,
} from './group-compact-field';
