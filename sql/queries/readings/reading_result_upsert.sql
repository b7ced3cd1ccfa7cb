-- What the reader made of an object (state 'read' or 'not_read').
INSERT INTO screen_readings (
    instance_id, state, reason, profile_key, profile_version, frames_read, updated_at,
    mi, mi_status, mi_text, mi_decimals, mi_reason,
    tis, tis_status, tis_text, tis_decimals, tis_reason,
    tib, tib_status, tib_text, tib_decimals, tib_reason,
    tic, tic_status, tic_text, tic_decimals, tic_reason,
    tis_focus, tis_focus_status, tis_focus_text, tis_focus_decimals, tis_focus_reason,
    tis_surface, tis_surface_status, tis_surface_text, tis_surface_decimals,
    tis_surface_reason)
VALUES (
    :instance_id, :state, :reason, :profile_key, :profile_version, :frames_read, :updated_at,
    :mi, :mi_status, :mi_text, :mi_decimals, :mi_reason,
    :tis, :tis_status, :tis_text, :tis_decimals, :tis_reason,
    :tib, :tib_status, :tib_text, :tib_decimals, :tib_reason,
    :tic, :tic_status, :tic_text, :tic_decimals, :tic_reason,
    :tis_focus, :tis_focus_status, :tis_focus_text, :tis_focus_decimals, :tis_focus_reason,
    :tis_surface, :tis_surface_status, :tis_surface_text, :tis_surface_decimals,
    :tis_surface_reason)
ON CONFLICT (instance_id) DO UPDATE SET
    state = excluded.state, reason = excluded.reason, profile_key = excluded.profile_key,
    profile_version = excluded.profile_version, frames_read = excluded.frames_read,
    updated_at = excluded.updated_at,
    mi = excluded.mi, mi_status = excluded.mi_status, mi_text = excluded.mi_text,
    mi_decimals = excluded.mi_decimals, mi_reason = excluded.mi_reason,
    tis = excluded.tis, tis_status = excluded.tis_status, tis_text = excluded.tis_text,
    tis_decimals = excluded.tis_decimals, tis_reason = excluded.tis_reason,
    tib = excluded.tib, tib_status = excluded.tib_status, tib_text = excluded.tib_text,
    tib_decimals = excluded.tib_decimals, tib_reason = excluded.tib_reason,
    tic = excluded.tic, tic_status = excluded.tic_status, tic_text = excluded.tic_text,
    tic_decimals = excluded.tic_decimals, tic_reason = excluded.tic_reason,
    tis_focus = excluded.tis_focus, tis_focus_status = excluded.tis_focus_status,
    tis_focus_text = excluded.tis_focus_text, tis_focus_decimals = excluded.tis_focus_decimals,
    tis_focus_reason = excluded.tis_focus_reason,
    tis_surface = excluded.tis_surface, tis_surface_status = excluded.tis_surface_status,
    tis_surface_text = excluded.tis_surface_text,
    tis_surface_decimals = excluded.tis_surface_decimals,
    tis_surface_reason = excluded.tis_surface_reason;
