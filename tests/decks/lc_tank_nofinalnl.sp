Coupled tank, the file ends without a newline
Vkick in 0 pulse(0 1 0 1n 1n 20n 200n)
Rs in p1 50
Lp p1 0 10u
Ls s1 0 10u ic=0
Kps Lp Ls 0.6
Cs s1 0 1n ic=0
Rl s1 0 1k
.tran 5n 400n
.print tran v(s1)
.end