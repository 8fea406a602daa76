-- load: files of the batch already recorded with the same path and content
select s.path, s.sha256 from raw_source_object as s join incoming_paths as i using (path)
