-- grain: one row per sample size n: 1-based ranks of the 95 % order-statistic interval of the median
create or replace temp table median_ci_rank as select * from incoming_median_ci_rank
