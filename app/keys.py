"""Session-state keys of the app, named once (the values are what Streamlit stores them under)."""

DATA = "data"
SAVED_MODELS = "saved_models"
PREVIOUS_GRID = "previous_grid"
UPLOAD_ERROR = "upload_error"
GRID_VERSION = "grid_version"
GRID_BASE = "grid_base"
CLUSTER_COLUMN = "cluster_column"
SPEC_UPLOAD_ERROR = "spec_upload_error"
SAVE_MESSAGE = "save_message"
GRID_KEY = "grid_key"
COVARIANCE = "covariance"
VIEW = "view"
UPLOAD_SEEN = "upload_seen"
SPEC_UPLOAD_NOTES = "spec_upload_notes"
SAVE_NAME = "save_name"
REPORT = "report"
REPORT_SWEEP = "report_sweep"  # the report includes the forms sweep
SWEEP_VARY = "sweep_vary"  # the Forms view: the variables whose forms vary (None: the sweep's own choice)
SWEEP_FOCUS = "sweep_focus"  # the Forms view: the regressor whose effect is compared (None: the sweep's own)
SWEEP_NOTE = "sweep_note"  # the Forms view: why the last choice of variables was not taken
PROFILE_PICK = "profile_pick"
CURVE_OVERLAY = "curve_overlay"
ADVICE_MESSAGE = "advice_message"
UPLOADER_VERSION = "uploader_version"
SPEC_UPLOAD_VERSION = "spec_upload_version"
SHEET_LIST = "sheet_list"
REMOVE_PICK = "remove_pick"
PPML = "ppml"
LOCK_MESSAGE = "lock_message"
LAST_GOOD = "last_good"
AT = "at"
UNITS_CHECK_ON = "units_check_on"
GAP_TOLERANCE = "gap_tolerance"
GAP_PICK = "gap_pick"
CURVE_PICK = "curve_pick"
# Export choices (sidebar), and the caption line the views set for their charts.
EXPORT_SIZE = "export_size"
EXPORT_FORMAT = "export_format"
EXPORT_CAPTION = "export_caption"
CHART_CAPTION = "_chart_caption"
# Identifier and date columns may enter the model when ticked.
UNLOCK_LOCKED = "unlock_locked"
# Undo and redo of model edits: earlier and later grids (bounded).
UNDO = "undo_history"
REDO = "redo_history"
# Time-series standard errors: the column ordering the rows in time, and the spec's lags (kept).
TIME_COLUMN = "time_column"
LAGS = "lags"
# Scenarios (several changes at once): the spec's "scenarios" list, and the builder's inputs.
SCENARIOS = "scenarios"
SCENARIO_NAME = "scenario_name"
SCENARIO_PICK = "scenario_pick"
SCENARIO_REMOVE = "scenario_remove"
# Absorbed identifiers of the last run (to cluster by a newly absorbed one) and the note saying so.
ABSORBED_SEEN = "absorbed_seen"
ABSORB_MESSAGE = "absorb_message"
CLUSTER_SECOND = "cluster_second"  # the second grouping of two-way clustered errors, or "none"
PENDING_CLUSTER = "pending_cluster"  # an identifier just absorbed: cluster by it at the next run
JUST_LOADED = "just_loaded"  # rows of a table just taken in: its first fit says so while it runs
REPORT_NOTE = "report_note"  # why the last report was not written (stopped, or failed)
SHOW_DISTRIBUTIONS = "show_distributions"  # the residual checks also draw each variable as recorded and as transformed
JOBS = "jobs"  # work on worker threads by name (app.jobs): the report, long checks and sweeps
REPORT_SEEN = "report_seen"  # the report job whose end was last taken in
