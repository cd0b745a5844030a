"""The many-crew algorithms: crews, street neighbourhoods, seeding, territories, the balancer, the parallel executor, planning and replanning."""
