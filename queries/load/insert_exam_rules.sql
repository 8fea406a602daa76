-- load: the exam rules in force
insert into raw_exam_rule by name select * from incoming_exam_rule
