-- One rejected object (store_put_rejection), with the site of the
-- receiver that refused it.
INSERT INTO rejections (received_at, calling_ae_title, peer_address,
                        sop_class_uid, sop_instance_uid, source_path,
                        quarantine_path, reason, site)
VALUES (coalesce(nullif(:received_at, ''),
                 strftime('%Y-%m-%dT%H:%M:%fZ', 'now')),
        :calling_ae_title, :peer_address, :sop_class_uid, :sop_instance_uid,
        :source_path, :quarantine_path, :reason, :site);
