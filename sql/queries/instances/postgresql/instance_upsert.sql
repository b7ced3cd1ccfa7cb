-- PostgreSQL: store one instance (store_put_instance), as
-- ../instance_upsert.sql does for SQLite: a re-sent SOP Instance UID
-- updates the row in place (same id, replaced_count + 1,
-- first_received_at kept). instances is partitioned by month of first
-- receipt and cannot hold a unique key on the UID alone, so the UID's row
-- in instance_keys decides: inserted there (a new object, a new id) or
-- found and locked there (a re-send, the same id and month), which makes
-- two receivers sending the same object at once write one row. Returns
-- replaced_count and id. An empty :received_at means "now" (UTC).
WITH key AS (
    INSERT INTO instance_keys AS k (sop_instance_uid, id, first_received_at)
    VALUES (:sop_instance_uid, nextval('instances_id_seq'),
            coalesce(nullif(:received_at, ''), to_char(clock_timestamp() AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"')))
    ON CONFLICT (sop_instance_uid) DO UPDATE SET id = k.id
    RETURNING k.id, k.first_received_at, k.xmax = 0 AS inserted
),
inserted AS (
    INSERT INTO instances (
        id, first_received_at, received_at,
        sop_instance_uid, sop_class_uid, study_instance_uid, series_instance_uid, modality,
        station_name, institutional_department_name, study_description, accession_number,
        protocol_name, transfer_syntax_uid, calling_ae_title, source_path, acquired_at,
        acquired_at_source, number_of_frames, number_of_frames_status, frame_time_ms,
        frame_time_ms_status, is_ultrasound, mi, mi_status, mi_raw, tis, tis_status, tis_raw,
        tib, tib_status, tib_raw, tic, tic_status, tic_raw, tis_focus, tis_focus_status,
        tis_focus_raw, tis_surface, tis_surface_status, tis_surface_raw, object_kind,
        has_acoustic_record, specific_character_set, image_type, series_description,
        body_part_examined, performed_procedure_step_description, procedure_codes, modes,
        modes_image_type, modes_regions, modes_sr, image_type_bitmap, image_type_bitmap_status,
        modes_conflict, transducer_data, transducer_source, transducer_type, frequency_khz,
        frequency_source, cine_seconds, exam_type, exam_type_label, exam_type_source,
        governing_index, governing_index_source, gestational_age_weeks, gestational_age_source,
        preset, preset_source, room, room_source, shift, shift_source, age_group,
        age_group_source, operator_name, operator_source, overlong_fields, text_replaced)
    SELECT key.id, key.first_received_at, key.first_received_at,
        :sop_instance_uid::text, :sop_class_uid::text, :study_instance_uid::text,
        :series_instance_uid::text, :modality::text, :station_name::text,
        :institutional_department_name::text, :study_description::text,
        :accession_number::text, :protocol_name::text, :transfer_syntax_uid::text,
        :calling_ae_title::text, :source_path::text, :acquired_at::text,
        :acquired_at_source::text, :number_of_frames::bigint, :number_of_frames_status::text,
        :frame_time_ms::double precision, :frame_time_ms_status::text, :is_ultrasound::bigint,
        :mi::double precision, :mi_status::text, :mi_raw::text, :tis::double precision,
        :tis_status::text, :tis_raw::text, :tib::double precision, :tib_status::text,
        :tib_raw::text, :tic::double precision, :tic_status::text, :tic_raw::text,
        :tis_focus::double precision, :tis_focus_status::text, :tis_focus_raw::text,
        :tis_surface::double precision, :tis_surface_status::text, :tis_surface_raw::text,
        :object_kind::text, :has_acoustic_record::bigint, :specific_character_set::text,
        :image_type::text, :series_description::text, :body_part_examined::text,
        :performed_procedure_step_description::text, :procedure_codes::text, :modes::bigint,
        :modes_image_type::bigint, :modes_regions::bigint, :modes_sr::bigint,
        :image_type_bitmap::bigint, :image_type_bitmap_status::text, :modes_conflict::bigint,
        :transducer_data::text, :transducer_source::text, :transducer_type::text,
        :frequency_khz::bigint, :frequency_source::text, :cine_seconds::double precision,
        :exam_type::text, :exam_type_label::text, :exam_type_source::text,
        :governing_index::text, :governing_index_source::text,
        :gestational_age_weeks::double precision, :gestational_age_source::text, :preset::text,
        :preset_source::text, :room::text, :room_source::text, :shift::text,
        :shift_source::text, :age_group::text, :age_group_source::text, :operator_name::text,
        :operator_source::text, :overlong_fields::text, :text_replaced::bigint
    FROM key WHERE key.inserted
    RETURNING replaced_count, id
),
updated AS (
    UPDATE instances AS i SET
    sop_class_uid = :sop_class_uid,
    study_instance_uid = :study_instance_uid,
    series_instance_uid = :series_instance_uid,
    modality = :modality,
    station_name = :station_name,
    institutional_department_name = :institutional_department_name,
    study_description = :study_description,
    accession_number = :accession_number,
    protocol_name = :protocol_name,
    transfer_syntax_uid = :transfer_syntax_uid,
    calling_ae_title = :calling_ae_title,
    source_path = :source_path,
    acquired_at = :acquired_at,
    acquired_at_source = :acquired_at_source,
    received_at = coalesce(nullif(:received_at, ''), to_char(clock_timestamp() AT TIME ZONE 'UTC', 'YYYY-MM-DD"T"HH24:MI:SS.MS"Z"')),
    replaced_count = i.replaced_count + 1,
    number_of_frames = :number_of_frames,
    number_of_frames_status = :number_of_frames_status,
    frame_time_ms = :frame_time_ms,
    frame_time_ms_status = :frame_time_ms_status,
    is_ultrasound = :is_ultrasound,
    mi = :mi, mi_status = :mi_status, mi_raw = :mi_raw,
    tis = :tis, tis_status = :tis_status, tis_raw = :tis_raw,
    tib = :tib, tib_status = :tib_status, tib_raw = :tib_raw,
    tic = :tic, tic_status = :tic_status, tic_raw = :tic_raw,
    tis_focus = :tis_focus, tis_focus_status = :tis_focus_status,
    tis_focus_raw = :tis_focus_raw,
    tis_surface = :tis_surface, tis_surface_status = :tis_surface_status,
    tis_surface_raw = :tis_surface_raw,
    object_kind = :object_kind,
    has_acoustic_record = :has_acoustic_record,
    specific_character_set = :specific_character_set,
    image_type = :image_type,
    series_description = :series_description,
    body_part_examined = :body_part_examined,
    performed_procedure_step_description = :performed_procedure_step_description,
    procedure_codes = :procedure_codes,
    modes = :modes,
    modes_image_type = :modes_image_type,
    modes_regions = :modes_regions,
    modes_sr = :modes_sr,
    image_type_bitmap = :image_type_bitmap,
    image_type_bitmap_status = :image_type_bitmap_status,
    modes_conflict = :modes_conflict,
    transducer_data = :transducer_data,
    transducer_source = :transducer_source,
    transducer_type = :transducer_type,
    frequency_khz = :frequency_khz,
    frequency_source = :frequency_source,
    cine_seconds = :cine_seconds,
    exam_type = :exam_type,
    exam_type_label = :exam_type_label,
    exam_type_source = :exam_type_source,
    governing_index = :governing_index,
    governing_index_source = :governing_index_source,
    gestational_age_weeks = :gestational_age_weeks,
    gestational_age_source = :gestational_age_source,
    preset = :preset,
    preset_source = :preset_source,
    room = :room,
    room_source = :room_source,
    shift = :shift,
    shift_source = :shift_source,
    age_group = :age_group,
    age_group_source = :age_group_source,
    operator_name = :operator_name,
    operator_source = :operator_source,
    overlong_fields = :overlong_fields,
    text_replaced = :text_replaced
    FROM key
    WHERE NOT key.inserted AND i.id = key.id AND i.first_received_at = key.first_received_at
    RETURNING i.replaced_count, i.id
)
SELECT replaced_count, id FROM inserted
UNION ALL
SELECT replaced_count, id FROM updated;
