package causal
import ("testing";"context";"fmt";"syscall";"time")
func cpuNow() time.Duration { var r syscall.Rusage; syscall.Getrusage(syscall.RUSAGE_SELF, &r); return time.Duration(r.Utime.Nano()+r.Stime.Nano()) }
func TestScratchCPU(t *testing.T){
	f, names := effectFrame(100000, 10, 11)
	sc := FromSource(f).Treat("t").Outcome("y").Adjust(names...).Propensity()
	for _, est := range []Estimator{AIPW, IPWNormalized, RegressionAdjustment} {
	c0 := cpuNow(); w0 := time.Now()
	bs := sc.Bootstrap(context.Background(), est, ATE, BootstrapOptions{Replicates: 60, Seed: 1})
	fmt.Printf("%s: cpu %v/rep wall %v/rep failed %d se %.5f\n", est, (cpuNow()-c0)/60, time.Since(w0)/60, bs.Failed, bs.SE)
	}
}
