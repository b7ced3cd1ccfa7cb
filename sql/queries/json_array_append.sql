-- Builds a finding's instance_uids array one UID at a time. ?1 array, ?2 UID.
SELECT json_insert(?1, '$[#]', ?2);
