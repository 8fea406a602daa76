-- load: forget the previous exam rules (replaced on each run)
delete from raw_exam_rule
