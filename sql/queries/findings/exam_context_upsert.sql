-- The exam's context and state (open/closed) as the evaluation saw them.
INSERT INTO exam_context (study_instance_uid, room, preset, shift, transducer,
                          age_group, last_received_at, closed)
VALUES (:study_instance_uid, :room, :preset, :shift, :transducer, :age_group,
        :last_received_at, :closed)
ON CONFLICT (study_instance_uid) DO UPDATE SET
    room = excluded.room, preset = excluded.preset, shift = excluded.shift,
    transducer = excluded.transducer, age_group = excluded.age_group,
    last_received_at = excluded.last_received_at, closed = excluded.closed;
