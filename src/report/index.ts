/** Maps and reports: the public surface of src/report (re-exports only). */
export { renderMapSvg, renderMapPng, type MapInput, type MapOptions, type MapPoint, type MapDrawing } from './map.js';
export {
  renderReportHtml,
  type ReportInput,
  type ReportRun,
  type ReportMap,
  type ReportSolver,
  type ReportWell,
  type ReportObservation,
  type ReportVariantRow,
  type ReportInputs,
  type ReportCalibration,
  type ReportSource,
} from './html.js';
export { convergencePlotSvg, type ConvergencePlotOptions } from './plot.js';
export { svgToPng, encodePng, dataUrl } from './png.js';
export { escapeMarkup } from './text.js';
export { trackingOverlay, ZONE_COLOURS, type MapOverlay } from './trackingLayer.js';
export { trackingSectionHtml, type ReportTracking } from './trackingSection.js';
