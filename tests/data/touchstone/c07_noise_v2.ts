! Edge case 7: the same device as c07_noise_v1.s2p in version 2; Rn in ohms
[Version] 2.0
# GHz S MA R 50
[Number of Ports] 2
[Two-Port Data Order] 21_12
[Number of Frequencies] 3
[Number of Noise Frequencies] 2
[Network Data]
1.0  0.5 -30   4.0 150   0.05 60   0.4 -40
2.0  0.45 -60  3.5 120   0.06 50   0.35 -70
3.0  0.4 -90   3.0 90    0.07 40   0.3 -100
[Noise Data]
1.0  0.8   0.6   30   20
2.0  1.0   0.55  60   18
[End]
