-- One timeline entry of a study (store_put_exam).
INSERT INTO exam_timeline (study_instance_uid, position, sop_instance_uid,
                           start_seconds, interval_seconds, cine_seconds,
                           attributed_seconds, capped)
VALUES (:study_instance_uid, :position, :sop_instance_uid, :start_seconds,
        :interval_seconds, :cine_seconds, :attributed_seconds, :capped);
