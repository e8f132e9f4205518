package widgets
import ("testing";"encoding/json";"github.com/go-echarts/go-echarts/v2/charts";"github.com/go-echarts/go-echarts/v2/opts")
func TestScratch(t *testing.T){
 b:=charts.NewBar()
 b.SetGlobalOptions(charts.WithTitleOpts(opts.Title{Title:"x"}), charts.WithXAxisOpts(opts.XAxis{Type:"value"}))
 b.AddSeries("treated", []opts.BarData{{Value:[]float64{0.1,3}}}, charts.WithMarkAreaNameXAxisItemOpts(opts.MarkAreaNameXAxisItem{XAxis:0.2}))
 b.Validate()
 j,_:=json.Marshal(b.JSON()); t.Log(string(j))
}
