-- The reading state of an instance: 'queued', or 'not_read' with the
-- reason when it could not be queued.
INSERT INTO screen_readings (instance_id, state, reason, updated_at)
VALUES (:instance_id, :state, :reason, :updated_at)
ON CONFLICT (instance_id) DO UPDATE SET
    state = excluded.state, reason = excluded.reason, updated_at = excluded.updated_at,
    profile_key = NULL, profile_version = NULL, frames_read = 0,
    mi = NULL, mi_status = NULL, mi_text = NULL, mi_decimals = NULL, mi_reason = NULL,
    tis = NULL, tis_status = NULL, tis_text = NULL, tis_decimals = NULL, tis_reason = NULL,
    tib = NULL, tib_status = NULL, tib_text = NULL, tib_decimals = NULL, tib_reason = NULL,
    tic = NULL, tic_status = NULL, tic_text = NULL, tic_decimals = NULL, tic_reason = NULL,
    tis_focus = NULL, tis_focus_status = NULL, tis_focus_text = NULL,
    tis_focus_decimals = NULL, tis_focus_reason = NULL,
    tis_surface = NULL, tis_surface_status = NULL, tis_surface_text = NULL,
    tis_surface_decimals = NULL, tis_surface_reason = NULL;
