/** The upload page: the form (with the values last sent) and, after an upload, its result. */
import type { ImportResultView } from './import-result-view.js';
import { HOME_CRUMB, type PageViewBase } from './page-common.js';

export interface UploadFormValues {
  panel: string;
  scaleMin: string;
  scaleMax: string;
  sheet: string;
  quarantine: boolean;
}

export interface UploadView extends PageViewBase {
  form: UploadFormValues;
  /** Existing panel names, offered as suggestions. */
  panelNames: string[];
  /** Largest accepted file, for the hint under the file field. */
  uploadLimitText: string;
  /** The import's result after an upload; null on the empty form. */
  result: ImportResultView | null;
  /** A request-level problem (no file, bad option, too large) with its error list; null if none. */
  failure: { message: string; errors: { message: string }[] } | null;
}

export function buildUploadView(input: {
  form?: Partial<UploadFormValues>;
  panelNames: string[];
  uploadLimitText: string;
  result?: ImportResultView | null;
  failure?: UploadView['failure'];
}): UploadView {
  return {
    title: 'Upload ratings',
    breadcrumbs: [HOME_CRUMB, { label: 'Upload', href: null }],
    form: {
      panel: input.form?.panel ?? '',
      scaleMin: input.form?.scaleMin ?? '',
      scaleMax: input.form?.scaleMax ?? '',
      sheet: input.form?.sheet ?? '',
      quarantine: input.form?.quarantine ?? false,
    },
    panelNames: [...input.panelNames],
    uploadLimitText: input.uploadLimitText,
    result: input.result ?? null,
    failure: input.failure ?? null,
  };
}
