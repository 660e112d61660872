// Inputs of the PDF reports. The pipeline fills these; the report only draws what it is given.

import type { PanelResult, Plane, Point } from '../types.js';
import type { ColourMapName, RgbRaster } from './colourmaps.js';

/** A downsized copy of the photo for the report (8-bit sRGB, long side about 1000 px or less). */
export interface ReportThumbnail extends RgbRaster {
  /**
   * Multiply a thumbnail pixel coordinate (pixel centres at integers) by this to get the
   * coordinate system of PhotoResult.corners: x_full + 0.5 = (x_thumb + 0.5) * scaleToFull.
   */
  scaleToFull: number;
}

/** Pictures and maps of one photo, made by the pipeline for the report. */
export interface PhotoArtifacts {
  thumbnail: ReportThumbnail | null;
  /**
   * Rectified panel map of relative luminance (centre grid point = 1), covering the whole active
   * area (u, v 0..1, pixel centres at (i + 0.5) / width); NaN where there is no data. About 600 px wide.
   */
  relMap: Plane | null;
  /** Contrast against the fitted background, % (same geometry as relMap); NaN where there is no data. */
  contrastMap?: Plane | null;
  /**
   * Absolute scale when the camera was calibrated against a reference meter: luminance in cd/m²
   * of relative value 1. Without it every luminance is relative.
   */
  calibration?: { cdPerM2AtRelative1: number; source: string } | null;
  /** Size of the active area when known (datasheet or user); otherwise derived from geometry as nominal. */
  panelSizeMm?: { width: number; height: number; known: boolean } | null;
  /** Blob outlines in panel coordinates (u, v), by blob id; a blob without one is drawn as its bounding box. */
  blobOutlines?: Record<number, Point[]>;
}

export interface CriterionLine {
  /** e.g. "White, 9 points: luminance non-uniformity at most 25 %" */
  text: string;
  /** where the limit comes from, e.g. "Purchase spec. 1234 rev. C §4.2; formula IDMS §8.1" */
  source: string | null;
}

/** Same shape as the judge's CriteriaSummaryRecord. */
export interface CriteriaSummary {
  name: string;
  /** SHA-256 (hex) of the criteria file as read */
  hash: string;
  lines: CriterionLine[];
}

export interface LotInfo {
  lot: string | null;
  /** when the lot was inspected, free text (e.g. 2025-03-14) */
  date: string | null;
  station: string | null;
  operator: string | null;
}

export interface PanelReportInput {
  panel: PanelResult;
  /** keyed by PhotoResult.file, or an array parallel to panel.photos (null where there are none) */
  artifacts: Record<string, PhotoArtifacts> | Array<PhotoArtifacts | null>;
  criteria: CriteriaSummary;
  toolVersion: string;
  /**
   * Written as the PDF creation date and on the pages (a Date or an ISO 8601 string). Everything
   * else in the PDF follows from the inputs, so a fixed date gives byte-identical output.
   */
  generated: Date | string;
  lot?: LotInfo | null;
  /** colour map of the luminance maps; the contrast map uses the other one. Default viridis. */
  colourMap?: ColourMapName;
}

/** One key figure across the lot, e.g. white-field non-uniformity. */
export interface LotFigure {
  key: string;
  label: string;
  unit: string;
  limit: number | null;
  /** 'max': values above the limit fail; 'min': values below it fail */
  limitKind: 'max' | 'min';
  limitSource?: string | null;
  /** decimals to write values with */
  decimals?: number;
  values: Array<{ panel: string; value: number | null }>;
}

export interface LotReportInput {
  lot: LotInfo;
  panels: PanelResult[];
  /** Figures to plot; when absent they are derived from the panels (see lotFigures). */
  figures?: LotFigure[];
  criteria: CriteriaSummary;
  toolVersion: string;
  generated: Date | string;
  /** files that could not be assigned to a panel, listed so nothing leaves the lot unaccounted for */
  unassigned?: Array<{ file: string; reason: string }>;
}
