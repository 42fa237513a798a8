Attribute VB_Name = "LagsightMacro"
' Lagsight from the spreadsheet: check whether a column of numbers (or model residuals) is white noise.
'
' Import this module (File > Import File...) into a workbook, then run:
'   CheckSelectedColumn  - the selected cells of one column (or column A from row 2 down when one cell is selected)
'                          are sent to POST /v1/diagnostics; the verdict, the tests and the ACF/PACF table are
'                          written to a sheet named "Lagsight".
'   CheckSelectedColumns - each column of the selection is one series, its first row the series id; all are sent
'                          in one POST /v1/diagnostics/batch; one row per series goes to "Lagsight batch".
' Empty cells are sent as null (missing). Windows only (MSXML2.ServerXMLHTTP and Scripting.Dictionary).
' Errors from the service arrive as problem+json: the message box shows its detail and the field it concerns.
Option Explicit

Private Const BASE_URL As String = "http://127.0.0.1:8000"
Private Const TIMEOUT_MS As Long = 30000     ' give up after 30 s (connect, send and receive each)
Private Const PERIOD As Long = 0             ' seasonal period (7 daily, 12 monthly); 0 = none
Private Const MODEL_DF As Long = 0           ' fitted ARMA parameters (p + q) when the values are residuals
Private Const TOKEN As String = ""           ' bearer token, only where the deployment requires one

Private json As String                       ' the JSON reader's text and position (see ParseJson)
Private pos As Long

' ------------------------------------------------------------------------------------------- entry points

Public Sub CheckSelectedColumn()
    Dim cells As Range
    Set cells = SeriesRange(Selection)
    Dim body As String
    body = "{""values"": " & ValuesJson(cells) & OptionsJson() & "}"
    Dim report As Object
    If Not PostJson("/v1/diagnostics", body, report) Then Exit Sub
    WriteReport report, cells
End Sub

Public Sub CheckSelectedColumns()
    Dim sel As Range, col As Range, parts As String, n As Long
    Set sel = Selection
    For Each col In sel.Columns
        Dim values As Range
        Set values = col.Offset(1, 0).Resize(col.Rows.Count - 1, 1)
        If n > 0 Then parts = parts & ", "
        parts = parts & "{""id"": " & JsonString(CStr(col.Cells(1, 1).Value)) & ", ""values"": " & ValuesJson(values) & "}"
        n = n + 1
    Next col
    Dim answer As Object
    If Not PostJson("/v1/diagnostics/batch", "{""series"": [" & parts & "]" & OptionsJson() & "}", answer) Then Exit Sub
    WriteBatch answer
End Sub

' ------------------------------------------------------------------------------------------- request

Private Function SeriesRange(sel As Range) As Range
    If sel.Cells.Count > 1 Then
        Set SeriesRange = sel.Columns(1)
    Else
        Dim ws As Worksheet, lastRow As Long
        Set ws = sel.Worksheet
        lastRow = ws.Cells(ws.Rows.Count, 1).End(xlUp).Row
        Set SeriesRange = ws.Range(ws.Cells(2, 1), ws.Cells(lastRow, 1))
    End If
End Function

Private Function ValuesJson(cells As Range) As String
    Dim c As Range, out As String, first As Boolean
    first = True
    out = "["
    For Each c In cells.Cells
        If Not first Then out = out & ", "
        first = False
        If IsEmpty(c.Value) Then
            out = out & "null"
        ElseIf IsNumeric(c.Value) And Not IsError(c.Value) Then
            out = out & NumberJson(CDbl(c.Value))
        Else
            out = out & JsonString(CStr(c.Text))   ' the service names the bad cell by its index
        End If
    Next c
    ValuesJson = out & "]"
End Function

Private Function OptionsJson() As String
    Dim out As String
    If PERIOD > 0 Then out = out & ", ""period"": " & PERIOD
    If MODEL_DF > 0 Then out = out & ", ""model_df"": " & MODEL_DF
    OptionsJson = out
End Function

Private Function NumberJson(x As Double) As String
    NumberJson = Trim$(Str$(x))       ' Str$ always writes a decimal point, whatever the locale
    If Left$(NumberJson, 1) = "." Then NumberJson = "0" & NumberJson
    If Left$(NumberJson, 2) = "-." Then NumberJson = "-0" & Mid$(NumberJson, 2)
End Function

Private Function JsonString(s As String) As String
    Dim out As String, i As Long, ch As String
    For i = 1 To Len(s)
        ch = Mid$(s, i, 1)
        Select Case AscW(ch)
            Case 34: out = out & "\"""
            Case 92: out = out & "\\"
            Case 0 To 31: out = out & "\u" & Right$("000" & Hex$(AscW(ch)), 4)
            Case Else: out = out & ch
        End Select
    Next i
    JsonString = """" & out & """"
End Function

' POST a JSON body; on success parse the answer into result and return True. On an error show it and return False.
Private Function PostJson(route As String, body As String, ByRef result As Object) As Boolean
    Dim http As Object
    Set http = CreateObject("MSXML2.ServerXMLHTTP.6.0")
    http.setTimeouts TIMEOUT_MS, TIMEOUT_MS, TIMEOUT_MS, TIMEOUT_MS
    On Error GoTo NoAnswer
    http.Open "POST", BASE_URL & route, False
    http.setRequestHeader "Content-Type", "application/json"
    http.setRequestHeader "Accept", "application/json"
    If Len(TOKEN) > 0 Then http.setRequestHeader "Authorization", "Bearer " & TOKEN
    http.send body
    On Error GoTo 0
    If http.Status >= 200 And http.Status < 300 Then
        Set result = ParseJson(http.responseText)
        PostJson = True
    ElseIf InStr(1, http.getResponseHeader("Content-Type"), "application/problem+json", vbTextCompare) = 1 Then
        ShowProblem ParseJson(http.responseText)
    Else
        MsgBox "The service answered HTTP " & http.Status & ": " & Left$(http.responseText, 200), vbExclamation, "Lagsight"
    End If
    Exit Function
NoAnswer:
    MsgBox "No answer from " & BASE_URL & " within " & TIMEOUT_MS / 1000 & " s: " & Err.Description, vbExclamation, "Lagsight"
End Function

Private Sub ShowProblem(problem As Object)
    Dim msg As String, e As Variant
    msg = problem("title") & vbLf & problem("detail")
    If problem.Exists("errors") Then
        For Each e In problem("errors")
            msg = msg & vbLf & "  " & e("pointer") & ": " & e("detail")
        Next e
    End If
    MsgBox msg, vbExclamation, "Lagsight: error " & problem("status")
End Sub

' ------------------------------------------------------------------------------------------- output

Private Function TargetSheet(sheetName As String) As Worksheet
    On Error Resume Next
    Set TargetSheet = ThisWorkbook.Worksheets(sheetName)
    On Error GoTo 0
    If TargetSheet Is Nothing Then
        Set TargetSheet = ThisWorkbook.Worksheets.Add(After:=ThisWorkbook.Worksheets(ThisWorkbook.Worksheets.Count))
        TargetSheet.Name = sheetName
    End If
    TargetSheet.Cells.Clear
End Function

Private Function VerdictWord(v As Variant) As String
    If IsNull(v) Then
        VerdictWord = "no judgement"
    ElseIf v Then
        VerdictWord = "white noise"
    Else
        VerdictWord = "not white noise"
    End If
End Function

Private Sub WriteReport(report As Object, source As Range)
    Dim ws As Worksheet, r As Long, i As Long, t As Variant, c As Variant
    Set ws = TargetSheet("Lagsight")
    ws.Cells(1, 1).Value = "Lagsight report for " & source.Address(External:=True)
    ws.Cells(2, 1).Value = "verdict": ws.Cells(2, 2).Value = VerdictWord(report("verdict")("white_noise"))
    ws.Cells(3, 1).Value = "summary": ws.Cells(3, 2).Value = report("verdict")("summary")
    ws.Cells(4, 1).Value = "n": ws.Cells(4, 2).Value = report("n")
    r = 6
    ws.Cells(r, 1).Resize(1, 5).Value = Array("test", "up to lag", "df", "statistic", "p-value")
    For Each t In report("tests")
        r = r + 1
        ws.Cells(r, 1).Resize(1, 5).Value = Array(t("name"), t("lag"), t("df"), t("statistic"), t("p_value"))
    Next t
    r = r + 2
    ws.Cells(r, 1).Resize(1, 6).Value = Array("lag", "ACF", "lower", "upper", "outside", "PACF")
    Dim acf As Object, pacf As Object
    Set acf = report("acf"): Set pacf = report("pacf")
    For i = 1 To acf("lags").Count
        ws.Cells(r + i, 1).Resize(1, 6).Value = Array(acf("lags")(i), acf("values")(i), acf("lower")(i), _
            acf("upper")(i), IIf(Contains(acf("outside"), acf("lags")(i)), "yes", ""), pacf("values")(i))
    Next i
    r = r + acf("lags").Count + 2
    ws.Cells(r, 1).Value = "cautions"
    For Each c In report("cautions")
        r = r + 1
        ws.Cells(r, 1).Value = c
    Next c
    ws.Columns("A:F").AutoFit
    ws.Activate
End Sub

Private Sub WriteBatch(answer As Object)
    Dim ws As Worksheet, r As Long, item As Variant
    Set ws = TargetSheet("Lagsight batch")
    ws.Cells(1, 1).Resize(1, 4).Value = Array("id", "verdict", "lags outside the band", "error")
    r = 1
    For Each item In answer("results")
        r = r + 1
        ws.Cells(r, 1).Value = item("id")
        If item.Exists("error") Then
            ws.Cells(r, 4).Value = item("error")("detail")
        Else
            ws.Cells(r, 2).Value = VerdictWord(item("verdict")("white_noise"))
            ws.Cells(r, 3).Value = JoinNumbers(item("acf")("outside"))
        End If
    Next item
    ws.Columns("A:D").AutoFit
    ws.Activate
End Sub

Private Function Contains(list As Collection, value As Variant) As Boolean
    Dim x As Variant
    For Each x In list
        If x = value Then Contains = True: Exit Function
    Next x
End Function

Private Function JoinNumbers(list As Collection) As String
    Dim x As Variant, out As String
    For Each x In list
        If Len(out) > 0 Then out = out & ", "
        out = out & CStr(x)
    Next x
    JoinNumbers = out
End Function

' ------------------------------------------------------------------------------------------- a small JSON reader
' Objects become Scripting.Dictionary, arrays Collection, numbers Double, null Null.

Private Function ParseJson(text As String) As Object
    json = text
    pos = 1
    Dim v As Variant
    ParseValue v
    Set ParseJson = v
End Function

Private Sub SkipSpace()
    Do While pos <= Len(json)
        Select Case Mid$(json, pos, 1)
            Case " ", vbTab, vbCr, vbLf: pos = pos + 1
            Case Else: Exit Do
        End Select
    Loop
End Sub

Private Sub ParseValue(ByRef v As Variant)
    SkipSpace
    Select Case Mid$(json, pos, 1)
        Case "{": Set v = ParseObject()
        Case "[": Set v = ParseArray()
        Case """": v = ParseString()
        Case "t": pos = pos + 4: v = True
        Case "f": pos = pos + 5: v = False
        Case "n": pos = pos + 4: v = Null
        Case Else: v = ParseNumber()
    End Select
End Sub

Private Function ParseObject() As Object
    Dim d As Object, key As String, v As Variant
    Set d = CreateObject("Scripting.Dictionary")
    pos = pos + 1
    SkipSpace
    If Mid$(json, pos, 1) = "}" Then pos = pos + 1: Set ParseObject = d: Exit Function
    Do
        SkipSpace
        key = ParseString()
        SkipSpace
        pos = pos + 1                      ' the colon
        ParseValue v
        If IsObject(v) Then Set d(key) = v Else d(key) = v
        SkipSpace
        If Mid$(json, pos, 1) = "," Then
            pos = pos + 1
        Else
            pos = pos + 1                  ' the closing brace
            Exit Do
        End If
    Loop
    Set ParseObject = d
End Function

Private Function ParseArray() As Collection
    Dim c As New Collection, v As Variant
    pos = pos + 1
    SkipSpace
    If Mid$(json, pos, 1) = "]" Then pos = pos + 1: Set ParseArray = c: Exit Function
    Do
        ParseValue v
        c.Add v
        SkipSpace
        If Mid$(json, pos, 1) = "," Then
            pos = pos + 1
        Else
            pos = pos + 1                  ' the closing bracket
            Exit Do
        End If
    Loop
    Set ParseArray = c
End Function

Private Function ParseString() As String
    Dim out As String, ch As String
    pos = pos + 1                          ' the opening quote
    Do While pos <= Len(json)
        ch = Mid$(json, pos, 1)
        If ch = """" Then
            pos = pos + 1
            Exit Do
        ElseIf ch = "\" Then
            ch = Mid$(json, pos + 1, 1)
            Select Case ch
                Case "n": out = out & vbLf
                Case "t": out = out & vbTab
                Case "r": out = out & vbCr
                Case "b": out = out & Chr$(8)
                Case "f": out = out & Chr$(12)
                Case "u": out = out & ChrW$(CLng("&H" & Mid$(json, pos + 2, 4))): pos = pos + 4
                Case Else: out = out & ch
            End Select
            pos = pos + 2
        Else
            out = out & ch
            pos = pos + 1
        End If
    Loop
    ParseString = out
End Function

Private Function ParseNumber() As Double
    Dim start As Long
    start = pos
    Do While pos <= Len(json) And InStr(1, "+-0123456789.eE", Mid$(json, pos, 1)) > 0
        pos = pos + 1
    Loop
    ParseNumber = Val(Mid$(json, start, pos - start))   ' Val reads a decimal point whatever the locale
End Function
